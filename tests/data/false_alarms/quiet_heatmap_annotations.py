# low-contrast: white and dark numbers each on the heat-map cells they sit on
import matplotlib.pyplot as plt
import numpy as np
import seaborn as sns

rng = np.random.default_rng(4)
abundance = rng.uniform(0, 1, (5, 6))
fig, ax = plt.subplots()
sns.heatmap(abundance, annot=True, fmt=".2f", cmap="rocket", ax=ax)
ax.set_title("relative abundance by plot and month")
fig.savefig("heatmap.png")
