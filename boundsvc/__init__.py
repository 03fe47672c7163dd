"""boundsvc: certificates of error bounds for neural-network PDE surrogates."""

__version__ = "0.1.0"

__all__ = ["__version__"]
