"""manireg: intrinsic geometry, network sizing and learning-curve studies for data near a manifold."""

__version__ = "0.1.0"
