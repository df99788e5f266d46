"""Figure 1 as revised: every seedling shown, with the group median."""
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd

roots = pd.read_csv("data/roots.csv")
rng = np.random.default_rng(7)  # seeded jitter: the figure is the same on every run

fig, ax = plt.subplots(figsize=(4, 3.2))
for i, (salt, group) in enumerate(roots.groupby("salt_mM")):
    x = i + rng.uniform(-0.18, 0.18, len(group))
    ax.scatter(x, group["root_length_mm"], s=14, color="#1f4e79", alpha=0.8)
    ax.hlines(group["root_length_mm"].median(), i - 0.3, i + 0.3, color="black", linewidth=1.5)
ax.set_xticks(range(4), ["0", "50", "100", "150"])
ax.set_xlabel("NaCl (mM)")
ax.set_ylabel("primary root length (mm)")
ax.set_title("Root length, day 10")
fig.tight_layout()
fig.savefig("figures/fig2_root_length_points.png", dpi=100)
