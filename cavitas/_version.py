"""The package version (single source: pyproject.toml's is kept equal by a test)."""

__version__ = "0.1.0"
