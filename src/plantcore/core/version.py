"""The package version, in one place (the reports print it)."""

__version__ = "0.1.0"
