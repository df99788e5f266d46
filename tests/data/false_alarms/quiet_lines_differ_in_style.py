# colours-confusable-cvd: red and green lines that also differ in line style, so colour is not their only key
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(12)
fig, ax = plt.subplots()
ax.plot(days, 1 + 0.2 * days, color="tab:red", label="inoculated")
ax.plot(days, 1 + 0.1 * days, color="tab:green", linestyle="--", label="sterile soil")
ax.legend()
fig.savefig("styled_lines.png")
