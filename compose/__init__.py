"""compose: layered thematic maps from a declarative style, with a numeric hierarchy check."""

__version__ = "0.1.0"
__all__ = ["__version__"]
