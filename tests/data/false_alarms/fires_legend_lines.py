# colours-confusable-cvd: two lines named only by a legend, in red and green
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(12)
fig, ax = plt.subplots()
ax.plot(days, 1 + 0.2 * days, color="tab:red", label="inoculated")
ax.plot(days, 1 + 0.1 * days, color="tab:green", label="sterile soil")
ax.legend()
fig.savefig("legend_lines.png")
