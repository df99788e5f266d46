# points-hidden: opaque markers of whole-number counts piled on each other
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(7)
days = rng.integers(10, 20, size=800)
leaves = rng.integers(4, 12, size=800)
fig, ax = plt.subplots()
ax.scatter(days, leaves, s=30)
ax.set_xlabel("days after sowing")
ax.set_ylabel("leaves")
fig.savefig("leaves.png")
