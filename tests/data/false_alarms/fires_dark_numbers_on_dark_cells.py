# low-contrast: black numbers on the dark cells of an image
import matplotlib.pyplot as plt
import numpy as np

counts = np.array([[2, 4, 7], [5, 3, 6], [1, 8, 2]])
fig, ax = plt.subplots()
ax.imshow(counts, cmap="magma", vmin=0, vmax=60)
for (i, j), value in np.ndenumerate(counts):
    ax.text(j, i, str(value), ha="center", va="center", color="black")
fig.savefig("dark_cells.png")
