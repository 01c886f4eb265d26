"""Typed errors of interkit.

Every error a user can cause carries a one-line message that names the field and the
offending value. The command line turns these into exit code 2 without a traceback.
"""

from __future__ import annotations


class InterkitError(Exception):
    """Base class of every error interkit raises on purpose."""


class InputError(InterkitError, ValueError):
    """Bad user input: a file, a geometry, a spec key or value."""


class NotAvailableError(InterkitError, NotImplementedError):
    """A requested option exists in the API but is not implemented yet."""


class ConvergenceError(InterkitError, RuntimeError):
    """An electronic-structure calculation or a curve fit did not converge."""


class ResourceError(InterkitError, RuntimeError):
    """A calculation would exceed a stated resource limit (memory, size)."""


class ClusterError(InputError):
    """A Dask cluster cannot run the scan: no scheduler answers, or no worker joined
    within the stated wait."""


class StoreError(InterkitError, OSError):
    """The on-disk result store cannot be used."""


class InterkitWarning(UserWarning):
    """Warnings interkit emits (cost, approximations, unavailable schemes)."""


#: longest piece of a user's file quoted in an error message (characters)
EXCERPT_CHARS = 40


def excerpt(text: object, limit: int = EXCERPT_CHARS) -> str:
    """``repr`` of the start of ``text``, cut to ``limit`` characters, for error messages
    that quote a file which is not in the expected format."""
    text = str(text)
    return repr(text if len(text) <= limit else text[:limit] + "…")
