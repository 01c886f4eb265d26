"""Output files of the ``interkit`` command: checked before any computation, and a
Dataset that cannot be written after a run is saved under another name instead of lost.

Also the last-resort handler of :func:`interkit.cli.main`: an unexpected error prints one
line and the full traceback goes to a new file in a private log folder.
"""

from __future__ import annotations

import os
import sys
import tempfile
import traceback

from ..errors import InputError, InterkitError

EXIT_OK, EXIT_FAILED_POINTS, EXIT_USAGE, EXIT_INTERNAL = 0, 1, 2, 3


class OutputRescued(InterkitError):
    """The scan was computed, but its output file could not be written; the Dataset was
    saved under another name (given in the message)."""

    exit_code = EXIT_INTERNAL


def check_output(path: str, option: str, suffixes: tuple[str, ...], kind: str) -> None:
    """Refuse an output path before anything is computed: a folder, a wrong suffix, a
    missing or unwritable folder, or an existing file that cannot be replaced."""
    if os.path.isdir(path):
        raise InputError(f"{option}: {path!r} is a folder, not a file ({kind})")
    if not path.lower().endswith(suffixes):
        raise InputError(f"{option}: {path!r} should end in {' or '.join(suffixes)} ({kind})")
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"{option}: folder {folder!r} does not exist")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{option}: folder {folder!r} is not writable")
    if os.path.lexists(path) and not os.path.isfile(path):
        raise InputError(f"{option}: {path!r} exists and is not a regular file")


def check_output_folder(folder: str, option: str) -> None:
    """Refuse an output folder that is a file or cannot be created or written."""
    if os.path.exists(folder) and not os.path.isdir(folder):
        raise InputError(f"{option}: {folder!r} is a file, not a folder")
    probe = os.path.abspath(folder)
    while not os.path.exists(probe):
        probe = os.path.dirname(probe)
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError(f"{option}: folder {probe!r} is not writable")


def save_or_rescue(ds, path: str, option: str = "--output") -> None:
    """Save ``ds`` to ``path``; if that fails (permissions, disk full), save it next to
    ``path``, else in the current folder, else in the temporary folder, under a new name,
    and raise :class:`OutputRescued` naming that file. Raises the original error only
    when no copy could be written anywhere."""
    from ..data import schema as results
    from ..fileio import exclusive_temp

    try:
        results.save_scan(ds, path)
        return
    except OSError as exc:
        first = exc
    stem = os.path.splitext(os.path.basename(path))[0] or "scan"
    folders = [os.path.dirname(os.path.abspath(path)), os.getcwd(), tempfile.gettempdir()]
    for folder in dict.fromkeys(folders):
        try:
            fd, rescue = exclusive_temp(folder, f"{stem}.rescued-", ".nc")
            os.close(fd)
        except OSError:
            continue
        try:
            results.save_scan(ds, rescue)
        except OSError:
            try:
                os.unlink(rescue)
            except OSError:
                pass
            continue
        reason = first.strerror or type(first).__name__
        raise OutputRescued(f"{option}: could not write {path!r} ({reason}); the computed scan was saved "
                            f"to {rescue!r} instead") from None
    raise first


def internal_error(exc: BaseException) -> int:
    """Print one line for an unexpected error, write the traceback to a new file in a
    private folder of the temporary directory, and return exit status 3."""
    where = "(traceback could not be written)"
    try:
        folder = os.path.join(tempfile.gettempdir(), f"interkit-logs-{os.getuid()}")
        os.makedirs(folder, mode=0o700, exist_ok=True)
        info = os.lstat(folder)
        if os.path.islink(folder) or info.st_uid != os.getuid() or info.st_mode & 0o077:
            folder = tempfile.mkdtemp(prefix="interkit-logs-")
        fd, log = tempfile.mkstemp(prefix="traceback-", suffix=".txt", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write("".join(traceback.format_exception(type(exc), exc, exc.__traceback__)))
        where = f"full traceback in {log}"
    except OSError:
        pass
    text = str(exc).splitlines()[0][:200] if str(exc) else ""
    print(f"interkit: internal error: {type(exc).__name__}: {text}; {where}", file=sys.stderr)
    return EXIT_INTERNAL


def check_scan_output(path: str) -> None:
    """Check the ``--output`` netCDF path of a command that writes a scan."""
    check_output(path, "--output", (".nc",), "netCDF")


def add_unit_options(p, forces: bool = True) -> None:
    """``--unit`` (energies) and, with ``forces``, ``--force-unit`` on a sub-command parser."""
    from ..units import ENERGY_UNITS, FORCE_UNITS

    p.add_argument("--unit", default="kcal/mol", choices=list(ENERGY_UNITS),
                   help="energy unit of the printed tables (default: %(default)s)")
    if forces:
        p.add_argument("--force-unit", default=None, choices=list(FORCE_UNITS),
                       help="force unit of the printed tables (default: the one matching --unit, "
                            "kcal/mol/angstrom with kcal/mol and cm-1)")


def force_unit_of(args) -> str:
    """The ``--force-unit`` of ``args``, or the one matching its ``--unit``."""
    from ..units import MATCHING_FORCE_UNIT

    return getattr(args, "force_unit", None) or MATCHING_FORCE_UNIT[getattr(args, "unit", "kcal/mol")]


def verify_and_print(verify, path: str, args) -> int:
    """Run ``verify`` (scan, grid or study replay) on ``path`` with the command line's
    sample, seed, executor and progress options; print its table; exit code 0 when it passed."""
    table = verify(path, sample=args.sample, seed=args.seed, executor="serial" if args.serial else "processes",
                   workers=args.workers, progress=not args.quiet, log=print)
    print(table)
    return 0 if table.passed else 1
