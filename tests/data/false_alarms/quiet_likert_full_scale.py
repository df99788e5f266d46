# axis-empty-span: a 5-point rating scale shown in full
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(6)
ratings = rng.integers(3, 5, 40)
fig, ax = plt.subplots()
ax.scatter(rng.uniform(-0.2, 0.2, 40), ratings, alpha=0.6)
ax.set_ylim(0.5, 5.5)
ax.set_yticks([1, 2, 3, 4, 5], ["never", "rarely", "sometimes", "often", "always"])
ax.set_ylabel("how often do you rinse the sieves?")
fig.savefig("likert.png")
