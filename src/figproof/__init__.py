"""figproof: re-run figure scripts headlessly and check what they drew."""
__version__ = "0.1.0"

__all__ = ["__version__"]
