"""Geometry of a sample: intrinsic dimension, charts, tangent spaces, reach, curvature, resolution."""

from .charts import RADIUS_FACTOR, AtlasSummary, ChartAtlas, ChartCounts, chart_counts, farthest_point_sampling
from .curvature import CurvatureReport, estimate_curvature
from .dimension import (
    CorrelationDimension,
    DimensionEstimate,
    DimensionProfile,
    DimensionReport,
    LocalPCADimension,
    MLEDimension,
    TwoNNDimension,
    correlation_dimension,
    dimension_profile,
    estimate_dimension,
    local_pca_dimension,
    mle_dimension,
    twonn_dimension,
)
from .embedding import Embedding2D, embed_2d
from .neighbors import NeighborGraph, kneighbors
from .reach import ReachEstimate, estimate_reach
from .resolution import ResolutionCheck, resolution_check
from .summary import (GEOMETRY_STEPS, GeometrySummary, chart_dimension, describe_geometry, dimension_range,
                      working_dimension)

__all__ = [
    "RADIUS_FACTOR", "AtlasSummary", "ChartAtlas", "ChartCounts", "chart_counts", "farthest_point_sampling",
    "CurvatureReport", "estimate_curvature", "CorrelationDimension", "DimensionEstimate", "DimensionProfile",
    "DimensionReport", "LocalPCADimension", "MLEDimension", "TwoNNDimension", "correlation_dimension",
    "dimension_profile", "estimate_dimension", "local_pca_dimension", "mle_dimension", "twonn_dimension",
    "Embedding2D", "embed_2d", "NeighborGraph", "kneighbors", "ReachEstimate", "estimate_reach",
    "ResolutionCheck", "resolution_check", "GEOMETRY_STEPS", "GeometrySummary", "describe_geometry",
    "working_dimension", "chart_dimension", "dimension_range",
]
