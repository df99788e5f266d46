import matplotlib.pyplot as plt
import numpy as np

dose = np.array([0.1, 0.3, 1, 3, 10, 30, 100])
response = np.array([2.0, 4.5, 11.0, 26.0, 48.0, 71.0, 88.0])
fig, ax = plt.subplots()
ax.scatter(dose, response)
ax.set_xscale("log")
ax.set_ylim(0, 60)
ax.set_ylabel("inhibition (%)")
fig.savefig("doses.png")
