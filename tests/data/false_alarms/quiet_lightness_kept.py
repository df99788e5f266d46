# colours-confusable-cvd: hue lost for red-green readers, but the lightness difference still tells them apart
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(12)
fig, ax = plt.subplots()
ax.plot(days, 1 + 0.2 * days, color="#ff0000", label="inoculated")
ax.plot(days, 1 + 0.1 * days, color="#00ff00", label="sterile soil")
ax.legend()
fig.savefig("lightness.png")
