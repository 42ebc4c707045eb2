"""Version of lwrad (single source, read by pyproject and by result provenance)."""

__all__ = ["__version__"]

__version__ = "0.1.0"
