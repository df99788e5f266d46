# colours-confusable-cvd: error-bar series named only by a legend, in matplotlib's default orange and green
import matplotlib.pyplot as plt
import numpy as np

weeks = np.arange(8)
fig, ax = plt.subplots()
# the legend keys the containers; their lines are offset, so position alone does not say which is which
ax.errorbar(weeks, 2.0 + 0.1 * weeks, yerr=0.1, label="compost")
ax.errorbar(weeks, 1.5 + 0.1 * weeks, yerr=0.1, label="mineral fertiliser")
ax.errorbar(weeks, 1.0 + 0.1 * weeks, yerr=0.1, label="no amendment")
ax.legend()
fig.savefig("legend_errorbar_lines.png")
