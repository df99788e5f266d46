"""Pilot batch comparison; the pilot file lived on the old lab server."""
import matplotlib.pyplot as plt
import pandas as pd

pilot = pd.read_csv("data/pilot_batch_2023.csv")
main = pd.read_csv("data/roots.csv")

fig, ax = plt.subplots()
ax.scatter(pilot["salt_mM"], pilot["root_length_mm"], label="pilot")
ax.scatter(main["salt_mM"], main["root_length_mm"], label="main study")
ax.legend()
fig.savefig("figures/fig6_pilot_batch.png")
