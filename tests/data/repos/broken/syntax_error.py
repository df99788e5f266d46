import matplotlib.pyplot as plt
fig, ax = plt.subplots(
ax.plot([1, 2, 3])
