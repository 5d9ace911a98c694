"""The package version, at the bottom floor so that manifests and reports can name it."""

__all__ = ["__version__"]

__version__ = "0.1.0"
