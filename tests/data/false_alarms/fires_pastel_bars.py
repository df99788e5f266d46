# low-contrast: nearly white bars without edges
import matplotlib.pyplot as plt

fig, ax = plt.subplots()
ax.bar(["loam", "clay", "sand"], [12, 9, 15], color="#f4f4e8")
ax.set_ylabel("earthworms per m²")
fig.savefig("pastel.png")
