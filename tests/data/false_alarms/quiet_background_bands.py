# colours-confusable-cvd colours-confusable-gray low-contrast: pale background bands behind one series
import matplotlib.pyplot as plt
import numpy as np

hours = np.linspace(0, 48, 97)
fig, ax = plt.subplots()
ax.axvspan(12, 24, color="tab:red", alpha=0.15)
ax.axvspan(36, 48, color="tab:green", alpha=0.15)
ax.axhspan(0.4, 0.6, color="tab:orange", alpha=0.1)
ax.plot(hours, 0.5 + 0.3 * np.sin(hours / 4), color="black")
ax.set_xlabel("hours")
ax.set_ylabel("respiration (a.u.)")
fig.savefig("bands.png")
