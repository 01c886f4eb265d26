"""Content-addressed on-disk store of per-calculation results.

Each entry is one JSON file ``objects/<key[:2]>/<key>.json`` holding the job
description, its result record and a SHA-256 checksum of both. Writes are atomic
(temporary file + rename in the same directory), so a killed run never leaves a
half-written entry; a damaged entry fails its checksum on read, is moved aside and
recomputed.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import warnings
from datetime import datetime, timezone
from pathlib import Path

from .errors import InterkitWarning, StoreError

ENTRY_FORMAT = "interkit-result/1"


def _checksum(payload: dict) -> str:
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


class ResultStore:
    """A directory of calculation results addressed by job key.

    Parameters
    ----------
    root : path-like
        Directory of the store; created if missing.
    """

    def __init__(self, root: str | os.PathLike):
        self.root = Path(root)
        try:
            (self.root / "objects").mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cache: cannot create store directory {str(self.root)!r} ({exc.strerror})") from None
        if not os.access(self.root / "objects", os.W_OK):
            raise StoreError(f"cache: store directory {str(self.root)!r} is not writable")
        self.damaged: list[str] = []

    def path(self, key: str) -> Path:
        """File of the entry ``key``."""
        return self.root / "objects" / key[:2] / f"{key}.json"

    def __contains__(self, key: str) -> bool:
        return self.path(key).is_file()

    def get(self, key: str) -> dict | None:
        """The stored record of ``key``, or None if absent or damaged."""
        path = self.path(key)
        try:
            with open(path, encoding="utf-8") as fh:
                entry = json.load(fh)
            payload = {"key": entry["key"], "job": entry["job"], "record": entry["record"]}
            ok = entry.get("format") == ENTRY_FORMAT and entry["key"] == key and \
                entry.get("checksum") == _checksum(payload)
        except FileNotFoundError:
            return None
        except (OSError, ValueError, KeyError, TypeError):
            ok = False
        if not ok:
            self._quarantine(path, key)
            return None
        return entry["record"]

    def _quarantine(self, path: Path, key: str) -> None:
        self.damaged.append(key)
        warnings.warn(f"store: entry {key[:12]} failed its checksum and will be recomputed",
                      InterkitWarning, stacklevel=3)
        try:
            os.replace(path, path.with_suffix(".damaged"))
        except OSError:
            pass

    def put(self, key: str, record: dict, job: dict) -> None:
        """Write an entry atomically (safe with concurrent writers of the same key)."""
        payload = {"key": key, "job": job, "record": record}
        entry = dict(payload, format=ENTRY_FORMAT, checksum=_checksum(payload),
                     written_utc=datetime.now(timezone.utc).isoformat(timespec="seconds"))
        path = self.path(key)
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".json", dir=path.parent)
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                json.dump(entry, fh, sort_keys=True)
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, path)
        except BaseException:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            raise

    def keys(self) -> list[str]:
        """Keys of every entry present."""
        return sorted(p.stem for p in (self.root / "objects").glob("*/*.json"))
