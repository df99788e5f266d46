# low-contrast: bars in matplotlib's and seaborn's default palettes on white
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import seaborn as sns

fig, (left, right) = plt.subplots(1, 2, figsize=(9, 4))
left.bar(range(10), np.arange(10) + 3, color=[f"C{k}" for k in range(10)])
left.set_ylabel("isolates")
frame = pd.DataFrame({"site": list("ABCDEFGHIJ"), "isolates": np.arange(10) + 3})
sns.barplot(data=frame, x="site", y="isolates", hue="site", palette="deep", legend=False, ax=right)
fig.savefig("palettes.png")
