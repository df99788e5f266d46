# colours-confusable-cvd colours-confusable-gray: polar bars coloured by their radius
import matplotlib.pyplot as plt
import numpy as np

angles = np.linspace(0, 2 * np.pi, 16, endpoint=False)
growth = 2 + np.abs(np.sin(angles * 1.5)) * 5
fig, ax = plt.subplots(subplot_kw={"projection": "polar"})
ax.bar(angles, growth, width=0.35, color=plt.cm.plasma(growth / growth.max()))
fig.savefig("polar.png")
