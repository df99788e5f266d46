import matplotlib.pyplot as plt
import pandas as pd

cells = pd.read_csv("data/cells.csv")
stats = cells.groupby("line")["area_um2"].agg(["mean", "sem"])
fig, ax = plt.subplots()
ax.bar(stats.index, stats["mean"], yerr=stats["sem"])
ax.set_ylabel("cell area (µm²)")
fig.savefig("figures/means.png")

fig2, ax2 = plt.subplots()
ax2.hist(cells["area_um2"], bins=5)
ax2.set_xlabel("cell area (µm²)")
fig2.savefig("figures/hist.png")
