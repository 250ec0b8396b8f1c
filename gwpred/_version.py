"""The package version (one place; the CLI and model files read it)."""

__version__ = "0.2.0"
