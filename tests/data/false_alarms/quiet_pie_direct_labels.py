# colours-confusable-cvd colours-confusable-gray: pie slices labelled directly
import matplotlib.pyplot as plt

fig, ax = plt.subplots()
ax.pie([35, 30, 20, 15], labels=["Bacillus", "Pseudomonas", "Streptomyces", "other"],
       colors=["tab:red", "tab:green", "tab:orange", "tab:olive"], autopct="%1.0f%%")
fig.savefig("pie.png")
