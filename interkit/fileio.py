"""Small file helpers shared by the modules that write files (results, report, CLI).

Files interkit writes get the permissions the user's umask allows (``0o666 & ~umask``),
like any file a program creates with ``open``; temporary files are created exclusively
(``O_EXCL``, unpredictable names), so no other user can plant or read them.
"""

from __future__ import annotations

import os
import tempfile


def existing_folder(path: str | os.PathLike, field: str) -> str:
    """``path`` as a string once its folder exists; else :class:`InputError` naming ``field``."""
    from .errors import InputError

    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise InputError(f"{field}: folder {folder!r} does not exist")
    return path


def current_umask() -> int:
    """The process umask (read without changing it where the system allows)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)   # no other portable way to read it
    os.umask(mask)
    return mask


def default_file_mode() -> int:
    """Mode of a new regular file under the current umask."""
    return 0o666 & ~current_umask()


def exclusive_temp(folder: str, prefix: str, suffix: str) -> tuple[int, str]:
    """Create a new file with an unpredictable name in ``folder`` (``O_EXCL``) whose mode
    follows the umask; returns ``(fd, path)``."""
    fd, path = tempfile.mkstemp(prefix=prefix, suffix=suffix, dir=folder)
    try:
        os.fchmod(fd, default_file_mode())
    except OSError:
        pass
    return fd, path


def atomic_write_text(path: str, text: str) -> str:
    """Write ``text`` (UTF-8) to ``path`` through an exclusive temporary file and a rename."""
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = exclusive_temp(folder, ".tmp-", "-" + os.path.basename(path))
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path
