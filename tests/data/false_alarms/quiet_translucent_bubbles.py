# points-hidden: large translucent bubbles (alpha 0.5) that overlap without piling up on one spot
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(4)
rain = rng.uniform(200, 1200, 150)
yield_ = 2 + 0.004 * rain + rng.normal(0, 0.6, 150)
fig, ax = plt.subplots()
ax.scatter(rain, yield_, s=rng.uniform(40, 300, 150), alpha=0.5)
ax.set_xlabel("rainfall (mm)")
ax.set_ylabel("yield (t/ha)")
fig.savefig("bubbles.png")
