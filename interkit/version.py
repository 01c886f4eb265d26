"""The version of interkit (one place; the package facade re-exports it)."""

__version__ = "0.2.0.dev0"
