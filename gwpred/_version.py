"""The package version (one place; the CLI and model files read it)."""

__version__ = "0.3.0.dev0"
