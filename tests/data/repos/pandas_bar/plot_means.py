import matplotlib
import numpy as np
import pandas as pd

matplotlib.use("Agg")
frame = pd.DataFrame({"site": ["north"] * 5 + ["south"] * 5,
                      "nitrate_mg_l": [2.31, 2.87, 2.45, 3.02, 2.66, 4.12, 3.87, 4.45, 4.03, 3.91]})
summary = frame.groupby("site")["nitrate_mg_l"].agg(["mean", "std"])
ax = summary["mean"].plot.bar(yerr=summary["std"], rot=0)
ax.set_ylabel("nitrate (mg/L)")
ax.figure.savefig("nitrate.png")
