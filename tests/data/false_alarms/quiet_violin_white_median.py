# low-contrast: white median dots inside dark violin bodies
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(8)
groups = [rng.normal(m, 1.0, 40) for m in (3, 4, 5)]
fig, ax = plt.subplots()
parts = ax.violinplot(groups, showextrema=False)
for body in parts["bodies"]:
    body.set_facecolor("#303060")
    body.set_alpha(1.0)
ax.scatter([1, 2, 3], [np.median(g) for g in groups], color="white", s=25, zorder=3)
ax.set_xticks([1, 2, 3], ["spring", "summer", "autumn"])
ax.set_ylabel("soil respiration")
fig.savefig("violins.png")
