# low-contrast points-hidden: seaborn's white median dot on the dark inner box of each violin
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import seaborn as sns

rng = np.random.default_rng(7)
roots = pd.DataFrame({"treatment": np.repeat(["control", "biochar", "compost"], 40),
                      "root length (cm)": np.r_[rng.normal(11, 2, 40), rng.normal(13, 2, 40), rng.normal(14, 2, 40)]})
sns.set_theme()  # the gray 'darkgrid' face
# pale bodies: the dot is seen against the inner box, not against the body
ax = sns.violinplot(roots, x="treatment", y="root length (cm)", hue="treatment", palette="Set3", linewidth=1,
                    inner="box")
ax.figure.savefig("violin_inner_box.png")
