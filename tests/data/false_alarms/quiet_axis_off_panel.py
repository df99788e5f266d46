# axis-empty-span: a key panel with its axis turned off
import matplotlib.pyplot as plt

fig, (key, data) = plt.subplots(1, 2, figsize=(8, 4))
key.scatter([0.5, 0.5], [0.9, 0.95], c=["tab:blue", "tab:orange"])
key.text(0.55, 0.9, "control")
key.text(0.55, 0.95, "inoculated")
key.set_ylim(0, 1)
key.set_axis_off()
data.plot([1, 2, 3], [2, 4, 3], color="tab:blue")
data.plot([1, 2, 3], [3, 5, 4], color="tab:orange")
fig.savefig("key.png")
