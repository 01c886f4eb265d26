"""The ``interkit`` command line (see :mod:`interkit.cli.main`)."""

from .main import main

__all__ = ["main"]
