"""Rates and sizing rules: pure functions of n, d, s, D and explicit constants."""

from manireg.theory.rates import (
    ApproximationParameters,
    ambient_approximation_parameters,
    ambient_exponent,
    approximation_parameters,
    implied_dimension,
    implied_smoothness,
    predicted_error,
    regression_exponent,
    ReferenceRate,
    reference_rate,
    noise_estimate_bias_exponent,
)
from manireg.theory.sizing import (
    ArchitectureSpec,
    SizingConstants,
    SizingTable,
    dense_parameter_count,
    size_network,
    sizing_table,
)

__all__ = [
    "regression_exponent",
    "ambient_exponent",
    "implied_dimension",
    "implied_smoothness",
    "approximation_parameters",
    "ambient_approximation_parameters",
    "ApproximationParameters",
    "predicted_error",
    "ReferenceRate",
    "reference_rate",
    "noise_estimate_bias_exponent",
    "SizingConstants",
    "ArchitectureSpec",
    "size_network",
    "SizingTable",
    "sizing_table",
    "dense_parameter_count",
]
