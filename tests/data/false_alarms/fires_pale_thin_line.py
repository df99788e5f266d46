# low-contrast: a thin pale-yellow line on white
import matplotlib.pyplot as plt
import numpy as np

weeks = np.arange(10)
fig, ax = plt.subplots()
ax.plot(weeks, weeks ** 0.5, color="#f5e663", label="shoot height")
ax.set_xlabel("week")
fig.savefig("pale_line.png")
