# axis-empty-span: a proportion shown on its whole 0-1 scale
import matplotlib.pyplot as plt
import numpy as np

weeks = np.arange(10)
fig, ax = plt.subplots()
ax.plot(weeks, 0.42 + 0.01 * np.sin(weeks), marker="o")
ax.set_ylim(0, 1)
ax.set_ylabel("share of seeds germinated")
fig.savefig("proportion.png")
