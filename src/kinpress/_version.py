"""The package version, one source for the build and for run time."""

__version__ = "0.1.0"
