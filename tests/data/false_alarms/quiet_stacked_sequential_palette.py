# colours-confusable-cvd colours-confusable-gray: stacked proportions in a 12-step sequential palette
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(5)
share = rng.dirichlet(np.ones(12), size=6).T
colors = plt.cm.Blues(np.linspace(0.2, 0.95, 12))
fig, ax = plt.subplots()
bottom = np.zeros(6)
for k in range(12):
    ax.bar(np.arange(6), share[k], bottom=bottom, color=colors[k], label=f"depth {k + 1}")
    bottom += share[k]
ax.legend(ncol=2, fontsize=7)
ax.set_ylabel("share of reads")
fig.savefig("stacked.png")
