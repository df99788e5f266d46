import pandas as pd

nests = pd.Series({"2023": 14, "2024": 19, "2025": 11})
ax = nests.plot.bar(rot=0)
ax.set_ylabel("nests found")
ax.figure.savefig("nests.png")
