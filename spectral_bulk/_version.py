"""Package version (single source of truth, read by pyproject.toml)."""

__version__ = "0.1.0"
