# colours-confusable-cvd: pale error bands in the colours of their lines; the lines differ in style too
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(20)
fig, ax = plt.subplots()
for mean, colour, dash, name in ((1.0, "tab:orange", "-", "compost"), (0.6, "tab:green", "--", "no amendment")):
    growth = mean + 0.05 * days
    ax.plot(days, growth, color=colour, linestyle=dash, label=name)
    ax.fill_between(days, growth - 0.1, growth + 0.1, color=colour, alpha=0.2)
ax.legend()
fig.savefig("bands.png")
