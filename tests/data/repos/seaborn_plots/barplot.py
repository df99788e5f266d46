import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import seaborn as sns

rng = np.random.default_rng(3)
df = pd.DataFrame({"diet": np.repeat(["chow", "high fat"], 15),
                   "glucose_mmol_l": np.concatenate([rng.normal(6.1, 0.7, 15), rng.normal(7.9, 1.1, 15)])})
fig, ax = plt.subplots()
sns.barplot(data=df, x="diet", y="glucose_mmol_l", capsize=0.2, ax=ax)
fig.savefig("glucose_bars.png")
