# axis-empty-span: panels that share their y limits so they can be compared
import matplotlib.pyplot as plt
import numpy as np

days = np.arange(15)
fig, (wet, dry) = plt.subplots(1, 2, sharey=True)
wet.plot(days, 5 + 6 * days, marker="o")
dry.plot(days, 40 + 0.3 * days, marker="o")
wet.set_title("watered")
dry.set_title("drought")
fig.savefig("shared.png")
