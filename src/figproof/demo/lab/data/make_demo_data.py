"""Regenerates the invented demo data of the barley salt-stress study (run once; the CSVs are committed)."""

import csv

import numpy as np

rng = np.random.default_rng(20261201)

with open("roots.csv", "w", newline="") as fh:
    w = csv.writer(fh)
    w.writerow(["seedling", "salt_mM", "treatment", "root_length_mm", "lateral_roots"])
    k = 0
    for salt, mean, sd in ((0, 84.0, 9.0), (50, 77.0, 11.0), (100, 61.0, 14.0), (150, 43.0, 16.0)):
        n = 14
        # the 150 mM group splits into tolerant and sensitive seedlings
        if salt == 150:
            values = np.concatenate([rng.normal(62, 5, n // 2), rng.normal(25, 5, n - n // 2)])
        else:
            values = rng.normal(mean, sd, n)
        for v in values:
            k += 1
            w.writerow([f"S{k:03d}", salt, f"{salt} mM", round(float(v), 2), int(rng.poisson(mean / 8))])

with open("growth.csv", "w", newline="") as fh:
    w = csv.writer(fh)
    w.writerow(["day", "line", "height_cm"])
    for line, rate in (("wild type", 1.9), ("hkt1 mutant", 1.4)):
        for day in range(0, 22, 3):
            w.writerow([day, line, round(float(2 + rate * day + rng.normal(0, 0.6)), 2)])

grid = 38 + 6 * np.sin(np.linspace(0, 3, 40))[:, None] * np.cos(np.linspace(0, 2, 40))[None, :]
grid += rng.normal(0, 0.8, grid.shape)
np.savetxt("leaf_spad_grid.csv", grid, delimiter=",", fmt="%.2f")

with open("germination.csv", "w", newline="") as fh:
    w = csv.writer(fh)
    w.writerow(["dish", "salt_mM", "seeds", "germinated", "radicle_mm"])
    for salt, p, rad in ((0, 0.95, 6.1), (50, 0.9, 5.2), (100, 0.7, 3.9), (150, 0.45, 2.4)):
        for dish in range(4):
            germ = int(rng.binomial(25, p))
            w.writerow([f"D{salt}-{dish}", salt, 25, germ, round(float(rng.normal(rad, 0.9)), 2)])
