"""The package version, in one place (the package root and the exports read it)."""
__version__ = "0.1.0"
