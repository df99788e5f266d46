# colours-confusable-cvd colours-confusable-gray: two groups told apart by where they stand
import matplotlib.pyplot as plt

fig, ax = plt.subplots()
ax.bar([0, 1, 2], [5, 7, 6], color="tab:red")
ax.bar([4, 5, 6], [3, 4, 4], color="tab:green")
ax.set_xticks([1, 5], ["loam", "clay"])
ax.set_ylabel("nodules per plant")
fig.savefig("groups.png")
