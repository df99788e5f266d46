"""Figure 1 as first drafted: mean root length per salt level, bars with standard-error bars."""
import matplotlib.pyplot as plt
import pandas as pd

roots = pd.read_csv("data/roots.csv")
summary = roots.groupby("salt_mM")["root_length_mm"].agg(["mean", "sem"])

fig, ax = plt.subplots(figsize=(4, 3.2))
ax.bar(summary.index.astype(str), summary["mean"], yerr=summary["sem"], capsize=4, color="#8c8c8c")
ax.set_xlabel("NaCl (mM)")
ax.set_ylabel("primary root length (mm)")
ax.set_title("Root length, day 10")
fig.tight_layout()
fig.savefig("figures/fig1_root_length_bars.png", dpi=100)
