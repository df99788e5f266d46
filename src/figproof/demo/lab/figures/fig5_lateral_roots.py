"""Lateral roots per seedling: counts, so bars are the right mark."""
import matplotlib.pyplot as plt
import pandas as pd

roots = pd.read_csv("data/roots.csv")
counts = roots.groupby("salt_mM")["lateral_roots"].sum()

fig, ax = plt.subplots(figsize=(4, 3.2))
ax.bar(counts.index.astype(str), counts.values, color="#4d4d4d")
ax.set_xlabel("NaCl (mM)")
ax.set_ylabel("lateral roots counted (all seedlings)")
fig.tight_layout()
fig.savefig("figures/fig5_lateral_roots.png", dpi=100)
