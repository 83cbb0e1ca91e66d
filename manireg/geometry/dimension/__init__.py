"""Intrinsic-dimension estimators, the multiscale dimension profile and a one-call dimension report.

Every estimator gets its neighbours from :func:`manireg.geometry.neighbors.kneighbors` (one query, cached by
a fingerprint of the data, duplicates collapsed). The algorithms are plain functions of a
:class:`~manireg.geometry.neighbors.NeighborGraph` (``mle_dimension``, ``twonn_dimension``,
``local_pca_dimension``); the estimator classes only check their parameters, ask for the graph and call
them. The correlation dimension needs pair distances at larger scales than a k-NN graph holds: it uses
pairwise distances (BLAS, as scikit-learn's ``euclidean_distances``) on a seeded subsample of at most
``max_points`` distinct points.

One concern per module:

* ``_base``: the :class:`DimensionEstimate` record, the estimator base class (parameter table checked at
  ``fit``, neighbour query, summary) and the bootstrap helpers;
* ``mle``, ``twonn``, ``local_pca``, ``correlation``: one algorithm each, as a plain function and an
  estimator;
* ``gride``: the generalised ratio T_k / T_(k/2) (TwoNN at k = 2), the profile's guide;
* ``profile``: :func:`dimension_profile` (estimates against neighbourhood scale), :func:`find_window`
  (between the noise and the curvature scales), blocks of neighbourhoods and the jackknife;
* ``calibration``: :func:`calibration_table` (raw estimates on reference samples of known d, cached);
* ``consensus``: :func:`estimate_dimension` (all estimators, the calibrated profile, a consensus and its
  interval).

Conventions
-----------
* Per-point values (``local_dimension_``) have one entry per *original* row of ``X``: duplicate rows get the
  value of the distinct point they copy (through ``graph.inverse``).
"""

from ._base import DimensionEstimate, _DimensionEstimator, _LocalDimensionEstimator
from .calibration import CalibrationTable, calibration_table
from .consensus import DimensionReport, estimate_dimension
from .gride import gride_dimension
from .correlation import CorrelationDimension, correlation_dimension
from .local_pca import LocalPCADimension, local_pca_dimension, local_pca_profile
from .mle import MLEDimension, mle_dimension
from .profile import DEFAULT_PROFILE_SCALES, DimensionProfile, dimension_profile, find_window
from .twonn import TwoNNDimension, twonn_dimension, twonn_from_ratios

__all__ = [
    "mle_dimension",
    "twonn_dimension",
    "local_pca_dimension",
    "correlation_dimension",
    "MLEDimension",
    "TwoNNDimension",
    "LocalPCADimension",
    "CorrelationDimension",
    "DimensionEstimate",
    "DimensionProfile",
    "DimensionReport",
    "dimension_profile",
    "estimate_dimension",
    "DEFAULT_PROFILE_SCALES",
    "gride_dimension",
    "find_window",
    "calibration_table",
    "CalibrationTable",
]
