# points-hidden: 5000 cells drawn see-through, so the crowding shows as density
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(9)
size = rng.normal(10, 2, 5000)
granularity = size * 0.4 + rng.normal(0, 1, 5000)
fig, ax = plt.subplots()
ax.scatter(size, granularity, s=12, alpha=0.15, color="black")
ax.set_xlabel("forward scatter")
ax.set_ylabel("side scatter")
fig.savefig("cytometry.png")
