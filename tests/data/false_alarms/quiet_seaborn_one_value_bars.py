# bars-for-continuous: seaborn bars of one value per plot (a survey's nitrate reading per field), not means
import matplotlib.pyplot as plt
import pandas as pd
import seaborn as sns

fields = pd.DataFrame({"field": ["north", "east", "south", "west", "orchard"],
                       "nitrate (mg/kg)": [18.8, 14.1, 21.6, 9.7, 12.3]})
ax = sns.barplot(fields, x="field", y="nitrate (mg/kg)", color="tab:blue")
ax.figure.savefig("nitrate.png")
