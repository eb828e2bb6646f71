"""slopescreen: screening of rainfall-triggered shallow landslides (see docs/cautions.md)."""

__version__ = "0.4.0"

__all__ = ["__version__"]
