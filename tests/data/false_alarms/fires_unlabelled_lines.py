# colours-confusable-cvd: two lines told apart by colour alone (no legend, no labels)
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(12)
fig, ax = plt.subplots()
ax.plot(days, 1 + 0.2 * days, color="tab:red")
ax.plot(days, 1 + 0.1 * days, color="tab:green")
fig.savefig("bare_lines.png")
