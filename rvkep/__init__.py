"""rvkep: Keplerian orbit fitting of stellar radial-velocity time series."""

__version__ = "0.1.0"
__all__ = ["__version__"]
