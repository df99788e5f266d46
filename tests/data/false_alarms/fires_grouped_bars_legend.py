# colours-confusable-cvd: grouped bars keyed by a legend, in red and green
import matplotlib.pyplot as plt
import numpy as np

x = np.arange(4)
fig, ax = plt.subplots()
ax.bar(x - 0.2, [12, 15, 11, 14], width=0.4, color="tab:red", label="2024")
ax.bar(x + 0.2, [13, 16, 10, 15], width=0.4, color="tab:green", label="2025")
ax.set_xticks(x, ["plot A", "plot B", "plot C", "plot D"])
ax.legend()
fig.savefig("grouped.png")
