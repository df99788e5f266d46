"""Shoot height over three weeks for the wild type and the hkt1 mutant."""
import matplotlib.pyplot as plt
import pandas as pd

growth = pd.read_csv("data/growth.csv")

fig, ax = plt.subplots(figsize=(4, 3.2))
for line, colour in (("wild type", "#d62728"), ("hkt1 mutant", "#2ca02c")):
    part = growth[growth["line"] == line]
    ax.plot(part["day"], part["height_cm"], marker="o", color=colour, label=line)
ax.set_ylim(0, 35)  # copied from the 2024 poster, before the day-21 measurements
ax.set_xlabel("day after transfer")
ax.set_ylabel("shoot height (cm)")
ax.legend(frameon=False)
fig.tight_layout()
fig.savefig("figures/fig4_growth_curves.png", dpi=100)
