"""The tool's version (one place; the package, the manifests and the command line read it)."""

__version__ = "0.1.0"

__all__ = ["__version__"]
