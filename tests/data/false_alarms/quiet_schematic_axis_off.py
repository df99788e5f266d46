# low-contrast: pale guide lines of a schematic panel with its axis turned off
import matplotlib.pyplot as plt
import numpy as np

fig, (sketch, data) = plt.subplots(1, 2, figsize=(8, 4))
theta = np.linspace(0, 2 * np.pi, 100)
sketch.plot(np.cos(theta), np.sin(theta), color="#e6e6e6")
sketch.plot([-1, 1], [0, 0], color="#eeeeee")
sketch.text(0, 0.1, "pot, top view", ha="center")
sketch.set_axis_off()
data.plot(np.arange(10), np.arange(10) ** 0.5, color="black")
data.set_xlabel("week")
fig.savefig("schematic.png")
