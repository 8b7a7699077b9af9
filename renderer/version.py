"""The package version (the one place it is written; pyproject.toml repeats it for packaging)."""

__version__ = "0.1.0"
