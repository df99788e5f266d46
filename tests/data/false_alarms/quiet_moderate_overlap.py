# points-hidden: 340 seedlings at the default marker size; neighbours touch, but every marker is seen
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(3)
height = rng.normal(20, 4, 340)
leaves = 0.4 * height + rng.normal(0, 1.2, 340)
fig, ax = plt.subplots()
ax.scatter(height, leaves)
ax.set_xlabel("seedling height (cm)")
ax.set_ylabel("leaf count")
fig.savefig("seedlings.png")
