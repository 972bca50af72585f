"""The package version: a leaf module that imports nothing, so any room may read it."""
__version__ = "0.1.0"
