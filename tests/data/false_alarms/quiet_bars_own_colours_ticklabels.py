# colours-confusable-cvd colours-confusable-gray: each bar its own colour, named by its tick label
import matplotlib.pyplot as plt

sites = ["north", "east", "south", "west", "centre"]
counts = [14, 22, 9, 17, 12]
fig, ax = plt.subplots()
ax.bar(sites, counts, color=["tab:red", "tab:green", "tab:orange", "tab:olive", "tab:brown"])
ax.set_ylabel("colonies")
fig.savefig("sites.png")
