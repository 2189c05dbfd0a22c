"""Command line interface (``spectral-bulk``)."""

from ._main import main

__all__ = ["main"]
