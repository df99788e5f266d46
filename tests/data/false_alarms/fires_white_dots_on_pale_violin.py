# low-contrast: white median dots straight on pale violin bodies (no dark box between them)
import matplotlib.pyplot as plt
import numpy as np

rng = np.random.default_rng(11)
lengths = [rng.normal(m, 2, 40) for m in (11, 13, 14)]
fig, ax = plt.subplots()
parts = ax.violinplot(lengths, positions=[1, 2, 3], showextrema=False)
for body in parts["bodies"]:
    body.set_facecolor("#f6f6bc")
    body.set_alpha(1.0)
ax.scatter([1, 2, 3], [np.median(v) for v in lengths], color="white", s=20, zorder=3)
ax.set_xticks([1, 2, 3], ["control", "biochar", "compost"])
fig.savefig("white_on_pale.png")
