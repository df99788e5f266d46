# colours-confusable-cvd: seaborn hue levels in red and green, keyed by the legend
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import seaborn as sns

rng = np.random.default_rng(2)
frame = pd.DataFrame({"ph": rng.uniform(5, 8, 60), "biomass": rng.normal(3, 0.5, 60),
                      "soil": np.repeat(["forest", "meadow"], 30)})
fig, ax = plt.subplots()
sns.scatterplot(data=frame, x="ph", y="biomass", hue="soil", palette=["#d62728", "#2ca02c"], ax=ax)
fig.savefig("hue.png")
