# points-hidden: markers along a densely sampled line
import matplotlib.pyplot as plt
import numpy as np

minutes = np.linspace(0, 60, 600)
fig, ax = plt.subplots()
ax.plot(minutes, 20 + 5 * np.sin(minutes / 8), marker=".", color="tab:blue")
ax.set_xlabel("minutes")
ax.set_ylabel("leaf temperature (°C)")
fig.savefig("logger.png")
