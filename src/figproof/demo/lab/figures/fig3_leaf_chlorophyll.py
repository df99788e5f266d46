"""Chlorophyll (SPAD units) across one leaf, from the imaging fluorometer grid."""
import matplotlib.pyplot as plt
import numpy as np

grid = np.loadtxt("data/leaf_spad_grid.csv", delimiter=",")

fig, ax = plt.subplots(figsize=(4, 3.4))
image = ax.imshow(grid, cmap="jet", origin="lower")
fig.colorbar(image, ax=ax, label="SPAD")
ax.set_title("Leaf 3, 100 mM NaCl")
ax.set_axis_off()
fig.savefig("figures/fig3_leaf_chlorophyll.png", dpi=100)
