# axis-empty-span: the data use a twentieth of the y-axis the script chose
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(15)
fig, ax = plt.subplots()
ax.plot(days, 40 + 0.3 * days, marker="o")
ax.set_ylim(0, 200)
ax.set_ylabel("shoot length (mm)")
fig.savefig("empty.png")
