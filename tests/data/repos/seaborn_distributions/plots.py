import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import seaborn as sns

rng = np.random.default_rng(11)
# two clearly separated subpopulations in the "treated" group
treated = np.concatenate([rng.normal(2.0, 0.3, 15), rng.normal(6.0, 0.3, 15)])
control = rng.normal(4.0, 0.9, 30)
df = pd.DataFrame({"group": ["control"] * 30 + ["treated"] * 30, "expression": np.concatenate([control, treated])})

fig, ax = plt.subplots()
sns.boxplot(data=df, x="group", y="expression", ax=ax)
fig.savefig("boxes.png")

fig2, ax2 = plt.subplots()
sns.swarmplot(data=df, x="group", y="expression", size=4, ax=ax2)
fig2.savefig("swarm.png")

fig3, ax3 = plt.subplots()
sns.violinplot(data=df, x="group", y="expression", inner=None, ax=ax3)
sns.stripplot(data=df, x="group", y="expression", color="black", size=3, ax=ax3)
fig3.savefig("violins.png")

small = df.groupby("group").head(4)
fig4, ax4 = plt.subplots()
sns.boxplot(data=small, x="group", y="expression", ax=ax4)
fig4.savefig("small_boxes.png")
