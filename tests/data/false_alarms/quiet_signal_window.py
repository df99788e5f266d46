# axis-clips-data: a 2-second window of a 60-second soil-moisture sensor trace, chosen with set_xlim
import matplotlib.pyplot as plt
import numpy as np

t = np.arange(0, 60, 0.01)
moisture = 0.3 + 0.02 * np.sin(2 * np.pi * 1.5 * t)
fig, ax = plt.subplots()
ax.plot(t, moisture)
ax.set_xlim(10, 12)
ax.set_xlabel("time (s)")
ax.set_ylabel("volumetric water content")
fig.savefig("window.png")
