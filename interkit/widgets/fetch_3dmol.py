"""Fetch ``3Dmol-min.js`` for offline 3D views (run at install time, never at import).

The file comes from the ``3dmol`` package of the npm registry (BSD-3-Clause), in the
version that the installed py3Dmol loads, and lands in ``interkit/widgets/static/``
(git-ignored: it is never committed). Run it with::

    python -m interkit.widgets.fetch_3dmol            # or: make interkit/widgets/static/3Dmol-min.js
"""

from __future__ import annotations

import inspect
import os
import re
import shutil
import subprocess
import sys
import tarfile
import tempfile
from pathlib import Path

#: where the widgets look for the library
STATIC_DIR = Path(__file__).resolve().parent / "static"
LIBRARY_PATH = STATIC_DIR / "3Dmol-min.js"
#: used when py3Dmol's source does not name a version
FALLBACK_VERSION = "2.5.5"


def py3dmol_js_version() -> str:
    """The 3Dmol.js version that the installed py3Dmol loads by default."""
    try:
        import py3Dmol

        source = inspect.getsource(py3Dmol.view.__init__)
    except (ImportError, OSError, TypeError):
        return FALLBACK_VERSION
    match = re.search(r"3dmol@([0-9]+\.[0-9]+\.[0-9]+)", source)
    return match.group(1) if match else FALLBACK_VERSION


def fetch(version: str | None = None, target: str | os.PathLike = LIBRARY_PATH) -> Path:
    """Download the ``3dmol`` npm package with ``npm pack`` and extract the minified build.

    Parameters
    ----------
    version : str, optional
        Package version (default: the one py3Dmol expects).
    target : path-like
        Destination of ``3Dmol-min.js``.

    Returns
    -------
    pathlib.Path
        The written file.
    """
    version = version or py3dmol_js_version()
    npm = shutil.which("npm")
    if npm is None:
        raise SystemExit("fetch_3dmol: npm is not installed (Debian: apt-get install npm)")
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="interkit-3dmol-") as tmp:
        subprocess.run([npm, "pack", "--silent", f"3dmol@{version}"], cwd=tmp, check=True,
                       stdout=subprocess.DEVNULL)
        tgz = next(Path(tmp).glob("3dmol-*.tgz"))
        with tarfile.open(tgz) as tar:
            member = tar.getmember("package/build/3Dmol-min.js")
            data = tar.extractfile(member).read()
    if len(data) < 100_000 or b"$3Dmol" not in data:
        raise SystemExit(f"fetch_3dmol: 3dmol@{version} has no usable build/3Dmol-min.js")
    partial = target.with_suffix(".partial")
    partial.write_bytes(data)
    os.replace(partial, target)
    return target


if __name__ == "__main__":
    out = fetch(sys.argv[1] if len(sys.argv) > 1 else None)
    print(f"wrote {out} ({out.stat().st_size // 1024} KiB, 3dmol@{py3dmol_js_version()})")
