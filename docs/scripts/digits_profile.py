"""Draw the dimension profile of scikit-learn's 8x8 digits for docs/dimension.md.

Run from the repository root: python docs/scripts/digits_profile.py
"""

import matplotlib

matplotlib.use("Agg")

from sklearn.datasets import load_digits  # noqa: E402

from manireg.geometry import estimate_dimension  # noqa: E402
from manireg.plots import plot_dimension_profile  # noqa: E402

report = estimate_dimension(load_digits().data, seed=0)
print(report)
fig = plot_dimension_profile(report)
fig.savefig("docs/img/digits_profile.png", dpi=100, bbox_inches="tight")
