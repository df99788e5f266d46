# colours-confusable-cvd: orange and green bar sets side by side, the second hatched, keyed by a legend
import matplotlib.pyplot as plt
import numpy as np

sites = np.arange(4)
fig, ax = plt.subplots()
ax.bar(sites - 0.2, [12, 15, 9, 11], width=0.4, color="tab:orange", label="2023 survey")
ax.bar(sites + 0.2, [14, 13, 10, 12], width=0.4, color="tab:green", hatch="//", label="2024 survey")
ax.set_xticks(sites, ["north", "east", "south", "west"])
ax.set_ylabel("earthworms per m²")
ax.legend()
fig.savefig("hatched_bars.png")
