# colours-confusable-cvd colours-confusable-gray: bars of a histogram coloured by their height
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(3)
lengths = rng.normal(42, 6, 400)
fig, ax = plt.subplots()
counts, edges, patches = ax.hist(lengths, bins=18)
for count, patch in zip(counts, patches):
    patch.set_facecolor(plt.cm.viridis(count / counts.max()))
ax.set_xlabel("hyphal length (µm)")
ax.set_ylabel("hyphae")
fig.savefig("hist.png")
