import matplotlib.pyplot as plt
import numpy as np


def load():
    return np.array([1.0, 2.0, 3.0])


values = load()
fig, ax = plt.subplots()
ax.plot(values, values[5])
