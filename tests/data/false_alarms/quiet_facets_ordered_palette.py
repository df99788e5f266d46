# colours-confusable-cvd low-contrast: an ordered palette (nitrogen dose) over facets, line width for a second variable
import numpy as np
import pandas as pd
import seaborn as sns

rng = np.random.default_rng(8)
days = np.arange(10)
rows = [{"day": d, "dose (kg N/ha)": dose, "site": site, "cultivar": cv,
         "biomass (g)": 2 + 0.01 * dose * d + (0.3 if cv == "B" else 0) + rng.normal(0, 0.1)}
        for d in days for dose in (0, 20, 40, 80, 160, 320) for site in ("upland", "valley") for cv in ("A", "B")]
grid = sns.relplot(pd.DataFrame(rows), x="day", y="biomass (g)", hue="dose (kg N/ha)", size="cultivar",
                   col="site", kind="line", palette=sns.color_palette("rocket_r"))
grid.savefig("dose_facets.png")
