# low-contrast: white numbers on dark image cells, dark numbers on light ones
import matplotlib.pyplot as plt
import numpy as np

counts = np.array([[2, 40, 7], [55, 3, 61], [9, 48, 1]])
fig, ax = plt.subplots()
ax.imshow(counts, cmap="Greys")
for (i, j), value in np.ndenumerate(counts):
    ax.text(j, i, str(value), ha="center", va="center", color="white" if value > 30 else "black")
ax.set_xticks(range(3), ["A", "B", "C"])
ax.set_yticks(range(3), ["dry", "wet", "flooded"])
fig.savefig("cells.png")
