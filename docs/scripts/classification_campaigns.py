"""Measure the numbers of docs/classification.md: a synthetic three-class campaign on a 2-sphere in R^8
(exact Bayes probabilities) and a campaign on scikit-learn's bundled digits.

Run: python docs/scripts/classification_campaigns.py
"""

import warnings

import numpy as np

from manireg.curves import Campaign
from manireg.curves.fitting import fit_exponent
from manireg.theory.classification import logistic_excess_risk_exponent

COLS = ["test_cross_entropy", "excess_logistic_risk", "test_error_rate", "excess_error_rate", "calibration_error"]


def show(rows, metrics):
    print(rows.groupby(["learner", "n"])[COLS].mean().round(3).to_string())
    for learner in sorted(rows["learner"].unique()):
        for m in metrics:
            print(f"[{m}] {fit_exponent(rows, learner, metric=m, floor=None)}")


warnings.simplefilter("ignore")
gen = {"manifold": "sphere", "n": 2400, "d": 2, "ambient_dim": 8, "n_classes": 3, "smoothness": 1.0,
       "temperature": 0.3, "seed": 0}
synthetic = Campaign(generator=gen, task="classify", sizes=[100, 200, 400, 800, 1600], repeats=3,
                     learners=["net_classifier", "knn_classifier", "logistic"])
show(synthetic.run(progress=False).rows, ["excess_logistic_risk", "excess_error_rate"])
print("reference exponent of the excess logistic risk (s=1, d=2):", logistic_excess_risk_exponent(1.0, 2.0))

from sklearn.datasets import load_digits  # noqa: E402

from manireg.geometry import estimate_dimension  # noqa: E402

X, y = load_digits(return_X_y=True)
dim = estimate_dimension(X)
print("digits: consensus dimension", round(dim.consensus, 2))
digits = Campaign(X=X, y=y, task="classify", sizes=[90, 180, 360, 720, 1400], repeats=3, test_size=350,
                  learners=["net_classifier", "knn_classifier", "logistic"], dimension=float(round(dim.consensus)))
show(digits.run(progress=False).rows, ["test_error_rate"])
