# low-contrast: a white label on a dark micrograph
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(1)
micrograph = rng.uniform(0.0, 0.15, (120, 160))
fig, ax = plt.subplots()
ax.imshow(micrograph, cmap="gray", vmin=0, vmax=1)
ax.text(10, 15, "root hair, day 4", color="white", fontsize=11)
ax.set_axis_off()
fig.savefig("micrograph.png")
