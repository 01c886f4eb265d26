"""Content-addressed on-disk store of per-calculation results.

Each entry is one JSON file ``objects/<key[:2]>/<key>.json`` holding the job
description, its result record and a SHA-256 checksum of both.

Several processes, notebooks and users may share one store:

* a write goes to a uniquely named temporary file in the entry's folder (created with
  ``O_EXCL``, named after the key, the process id and a random token) and is renamed
  over the entry, so a reader sees the old file or the new one, never a partial one, and
  two writers of the same key never share a temporary file; the last rename wins, and
  both wrote the same result;
* a damaged entry (checksum or format wrong, a job description that does not hash to
  the entry's key, or a record that lacks a field: :func:`entry_problem`) is moved aside
  only if it is still the file that was read: the reader first renames whatever is at
  the entry's path to a private name and compares it with the file it holds open; a
  fresh entry that another process wrote in between is put back;
* every successful read marks the entry as used (file times set to now), so
  :meth:`ResultStore.prune` can drop the least recently used entries.

Files are created with the permissions the umask allows (``0o666 & ~umask``); a store
shared between users needs a group-writable folder (``chmod g+ws``) and ``umask 002``.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import time
import warnings
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from ..errors import InputError, InterkitWarning, StoreError

ENTRY_FORMAT = "interkit-result/1"
#: suffix of a file being written (renamed to ``.json`` when complete)
PARTIAL_SUFFIX = ".partial"
#: suffix of a file a reader has taken aside to check it
CHECKING_SUFFIX = ".checking"
#: suffix of an entry that failed its checksum
DAMAGED_SUFFIX = ".damaged"
#: unfinished temporary files older than this (seconds) belong to a writer that died
STALE_PARTIAL_AGE_S = 3600.0


def _checksum(payload: dict) -> str:
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _private_name(path: Path, key: str, suffix: str) -> Path:
    return path.with_name(f".{key}.{os.getpid()}.{secrets.token_hex(6)}{suffix}")


@dataclass(frozen=True)
class StoreInfo:
    """What a store holds (see :meth:`ResultStore.info`).

    Attributes
    ----------
    root : str
        Folder of the store.
    entries : int
        Number of result entries.
    entry_bytes : int
        Size of the entries in bytes (apparent file sizes).
    total_bytes : int
        Size of every file of the store in bytes: entries, damaged entries set aside and
        unfinished temporary files.
    least_recent_use, most_recent_use : datetime or None
        Earliest and latest time (UTC) an entry was written or read; None when empty.
    damaged : int
        Damaged entries that were set aside (``*.damaged``).
    partial : int
        Unfinished temporary files (a writer is busy, or died).
    """

    root: str
    entries: int
    entry_bytes: int
    total_bytes: int
    least_recent_use: datetime | None
    most_recent_use: datetime | None
    damaged: int
    partial: int


@dataclass(frozen=True)
class PruneResult:
    """What :meth:`ResultStore.prune` removed and what is left (sizes in bytes)."""

    removed_entries: int
    removed_damaged: int
    removed_partial: int
    freed_bytes: int
    remaining_entries: int
    remaining_bytes: int


class ResultStore:
    """A directory of calculation results addressed by job key.

    Parameters
    ----------
    root : path-like
        Directory of the store.
    create : bool
        Create the directory if missing and require it to be writable (default). With
        False the store must exist already; used to inspect a store without changing it.
    """

    def __init__(self, root: str | os.PathLike, create: bool = True):
        self.root = Path(root)
        objects = self.root / "objects"
        if not create:
            if not objects.is_dir():
                raise StoreError(f"store: {str(self.root)!r} is not a result store (no objects/ folder)")
        else:
            try:
                objects.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise StoreError(f"cache: cannot create store directory {str(self.root)!r} ({exc.strerror})") from None
            if not os.access(objects, os.W_OK):
                raise StoreError(f"cache: store directory {str(self.root)!r} is not writable")
        self.damaged: list[str] = []

    def path(self, key: str) -> Path:
        """File of the entry ``key``."""
        return self.root / "objects" / key[:2] / f"{key}.json"

    def __contains__(self, key: str) -> bool:
        return self.path(key).is_file()

    def get(self, key: str) -> dict | None:
        """The stored record of ``key``, or None if absent, unreadable or damaged.

        A damaged entry (checksum or format wrong, or :func:`entry_problem`) is moved
        aside (``<key>...damaged``) with a warning, so the calculation is done again; a successful read marks the entry as used.
        """
        path = self.path(key)
        try:
            fh = open(path, "rb")
        except OSError:  # absent, or unreadable for this user: computed again
            return None
        with fh:
            try:
                entry = json.loads(fh.read())
                payload = {"key": entry["key"], "job": entry["job"], "record": entry["record"]}
                ok = entry.get("format") == ENTRY_FORMAT and entry["key"] == key and \
                    entry.get("checksum") == _checksum(payload)
            except (OSError, ValueError, KeyError, TypeError):
                ok = False
            problem = None if not ok else entry_problem(key, entry["job"], entry["record"])
            if ok and problem is None:
                _mark_used(fh.fileno())
                return entry["record"]
            # keep the file open while checking, so its inode cannot be reused meanwhile
            self._quarantine(path, key, os.fstat(fh.fileno()), problem)
        return None

    def _quarantine(self, path: Path, key: str, read: os.stat_result, problem: str | None = None) -> None:
        """Move the damaged file that was read aside, but never a fresh entry."""
        taken = _private_name(path, key, CHECKING_SUFFIX)
        try:
            os.rename(path, taken)  # whatever is at the entry's path now
        except OSError:
            return  # gone already: another reader set it aside, or pruned
        try:
            now = os.stat(taken)
        except OSError:
            return
        if (now.st_ino, now.st_dev) == (read.st_ino, read.st_dev):
            aside = path.with_name(f"{key}.{time.time_ns()}-{os.getpid()}{DAMAGED_SUFFIX}")
            try:
                os.rename(taken, aside)
            except OSError:
                pass
            self.damaged.append(key)
            why = f"is damaged ({problem})" if problem else "failed its checksum"
            warnings.warn(f"store: entry {key[:12]} {why} and will be recomputed",
                          InterkitWarning, stacklevel=3)
            return
        # another process replaced the damaged file with a fresh entry in between
        try:
            os.link(taken, path)  # put it back unless an even newer entry is there
        except FileExistsError:
            pass
        except OSError:  # file system without hard links
            try:
                os.replace(taken, path)
            except OSError:
                pass
        try:
            os.unlink(taken)
        except OSError:
            pass

    def put(self, key: str, record: dict, job: dict) -> None:
        """Write an entry atomically (safe with concurrent writers of the same key)."""
        payload = {"key": key, "job": job, "record": record}
        entry = dict(payload, format=ENTRY_FORMAT, checksum=_checksum(payload),
                     written_utc=datetime.now(timezone.utc).isoformat(timespec="seconds"))
        data = json.dumps(entry, sort_keys=True).encode()
        path = self.path(key)
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = _private_name(path, key, PARTIAL_SUFFIX)
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
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
        return sorted(p.stem for p in self._files() if _kind(p.name) == "entry")

    def _files(self) -> list[Path]:
        return [p for p in (self.root / "objects").glob("*/*") if p.is_file()]

    def _scan(self) -> list[tuple[Path, str, int, float]]:
        """(path, kind, size in bytes, last use as POSIX time) of every file."""
        out = []
        for p in self._files():
            try:
                st = p.stat()
            except OSError:  # removed meanwhile
                continue
            out.append((p, _kind(p.name), int(st.st_size), max(st.st_atime, st.st_mtime)))
        return out

    def info(self) -> StoreInfo:
        """Entries, sizes, least and most recent use, damaged and unfinished files."""
        files = self._scan()
        entries = [f for f in files if f[1] == "entry"]
        uses = [f[3] for f in entries]

        def when(t):
            return datetime.fromtimestamp(t, timezone.utc) if t is not None else None

        return StoreInfo(
            root=str(self.root),
            entries=len(entries),
            entry_bytes=sum(f[2] for f in entries),
            total_bytes=sum(f[2] for f in files),
            least_recent_use=when(min(uses) if uses else None),
            most_recent_use=when(max(uses) if uses else None),
            damaged=sum(f[1] == "damaged" for f in files),
            partial=sum(f[1] == "partial" for f in files),
        )

    def prune(self, max_bytes: int) -> PruneResult:
        """Shrink the store to at most ``max_bytes`` bytes.

        Damaged entries set aside and unfinished temporary files older than
        ``STALE_PARTIAL_AGE_S`` go first; then entries are removed least recently used
        first (last write or read) until the files of the store add up to at most
        ``max_bytes``. Safe while other processes use the store: a removed entry is
        simply computed again when next needed.

        Parameters
        ----------
        max_bytes : int
            Size limit in bytes (apparent file sizes), >= 0.
        """
        if isinstance(max_bytes, bool) or not isinstance(max_bytes, int) or max_bytes < 0:
            raise StoreError(f"max_bytes: {max_bytes!r} is not a size in bytes")
        if not os.access(self.root / "objects", os.W_OK):
            raise StoreError(f"store: {str(self.root)!r} is not writable")
        files = self._scan()
        now = time.time()
        removed = {"entry": 0, "damaged": 0, "partial": 0}
        freed = 0
        keep = []
        for f in files:
            path, kind, size, used = f
            if kind == "damaged" or (kind == "partial" and now - used > STALE_PARTIAL_AGE_S):
                if _remove(path):
                    removed[kind] += 1
                    freed += size
            else:
                keep.append(f)
        total = sum(f[2] for f in keep)
        for path, _k, size, _t in sorted((f for f in keep if f[1] == "entry"), key=lambda f: f[3]):
            if total <= max_bytes:
                break
            if _remove(path):
                removed["entry"] += 1
                freed += size
            total -= size  # gone, by us or by a concurrent pruner
        remaining = sum(1 for f in keep if f[1] == "entry") - removed["entry"]
        return PruneResult(removed_entries=removed["entry"], removed_damaged=removed["damaged"],
                           removed_partial=removed["partial"], freed_bytes=freed,
                           remaining_entries=remaining, remaining_bytes=total)


#: fields every stored record has (run_energy_job, run_decomposition_job)
REQUIRED_RECORD_FIELDS = ("energy_hartree", "converged", "status", "detail", "wall_time_s")
#: further fields by job output
OUTPUT_RECORD_FIELDS = {
    "energy": ("scf_energy_hartree", "correlation_energy_hartree", "dispersion_energy_hartree"),
    "gradient": ("gradient_hartree_per_bohr", "electrostatic_force_hartree_per_bohr"),
    "sapt0": ("sapt0_hartree",),
}


def entry_problem(key: str, job: dict, record: dict) -> str | None:
    """Why an entry with a valid checksum still cannot be used, or None.

    The stored job description must hash to the entry's key (:func:`interkit.run.plan.job_key`,
    with this interkit and pyscf), and the record must be a finished (not failed) result
    with every field its job's outputs produce; the energy of an energy job must be a
    number.
    """
    from ..model.job import job_key

    if not isinstance(job, dict) or not isinstance(record, dict):
        return "job or record is not a mapping"
    try:
        if job_key(job) != key:
            return "its job description does not hash to its key"
    except (TypeError, ValueError):
        return "its job description cannot be hashed"
    outputs = job.get("outputs", ["energy"])
    needed = list(REQUIRED_RECORD_FIELDS)
    for out in outputs if isinstance(outputs, list) else ["energy"]:
        needed += OUTPUT_RECORD_FIELDS.get(out, ())
    missing = [f for f in needed if f not in record]
    if missing:
        return f"the record lacks {', '.join(missing)}"
    if record["status"] not in ("ok", "retried"):
        return f"record status {str(record['status'])[:20]!r} is not ok or retried"
    if "sapt0" not in outputs:
        e = record["energy_hartree"]
        if isinstance(e, bool) or not isinstance(e, (int, float)) or e != e:
            return "the record's energy_hartree is not a number"
    level = job.get("level")
    if isinstance(level, dict) and level.get("method") == "ccsd(t)" and "mp2_correlation_energy_hartree" not in record:
        # stored before CCSD(T) jobs kept their MP2 part (composite levels need it)
        return "the CCSD(T) record lacks mp2_correlation_energy_hartree"
    return None


def _kind(name: str) -> str:
    if name.endswith(DAMAGED_SUFFIX):
        return "damaged"
    if name.endswith((PARTIAL_SUFFIX, CHECKING_SUFFIX)) or name.startswith("."):
        return "partial"  # also temporary files of older interkit versions (".tmp-*.json")
    if name.endswith(".json"):
        return "entry"
    return "other"


def _mark_used(fd: int) -> None:
    """Set the file times of the open entry to now (needs write access; else skipped)."""
    try:
        os.utime(fd)
    except OSError:
        pass


def _remove(path: Path) -> bool:
    try:
        os.unlink(path)
        return True
    except OSError:
        return False


def parse_size(text: str, field: str = "size") -> int:
    """Bytes in a size such as ``'500MB'``, ``'2GB'``, ``'1.5 GiB'`` or ``'4096'``.

    KB, MB, GB, TB are powers of 1000; KiB, MiB, GiB, TiB powers of 1024; case is
    ignored and a bare number is bytes.
    """
    import re

    units = {"": 1, "b": 1, "kb": 10**3, "mb": 10**6, "gb": 10**9, "tb": 10**12,
             "k": 10**3, "m": 10**6, "g": 10**9, "t": 10**12,
             "kib": 2**10, "mib": 2**20, "gib": 2**30, "tib": 2**40}
    m = re.fullmatch(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*([A-Za-z]*)\s*", str(text))
    if not m or m.group(2).lower() not in units:
        raise InputError(f"{field}: {text!r} is not a size (e.g. 500MB, 2GB, 1GiB)")
    return int(float(m.group(1)) * units[m.group(2).lower()])


def format_size(n: int) -> str:
    """A size in bytes as text with a decimal unit (``'1.2 MB'``)."""
    for unit, factor in (("TB", 10**12), ("GB", 10**9), ("MB", 10**6), ("kB", 10**3)):
        if n >= factor:
            return f"{n / factor:.1f} {unit}"
    return f"{n} B"


# ---------------------------------------------------------------------- the default store
#: environment variable naming the default store folder (see :func:`default_store_folder`)
STORE_ENV_VARIABLE = "INTERKIT_CACHE"
#: the default store folder, relative to the current folder (the CLI's ``--cache`` default)
DEFAULT_STORE_FOLDER = ".interkit-cache"


class _DefaultStore:
    """The type of :data:`DEFAULT_STORE` (one instance)."""

    _instance = None

    def __new__(cls):
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __repr__(self) -> str:
        return "DEFAULT_STORE"

    def __reduce__(self):  # pickles (worker processes) to the same instance
        return (_DefaultStore, ())


#: ``cache=DEFAULT_STORE`` (the default of :func:`interkit.run_scan` and the launcher) means
#: the folder of :func:`default_store_folder`; ``cache=None`` keeps no store
DEFAULT_STORE = _DefaultStore()


def default_store_folder() -> str:
    """The default result store folder: ``$INTERKIT_CACHE`` when that environment variable
    is set and not empty, else ``.interkit-cache`` in the current folder (the same folder
    as the command line's ``--cache`` default), as an absolute path.

    The store sits beside the work, not in a per-user folder, so a project's results
    travel with it, a shared project folder shares them, and ``interkit store info
    .interkit-cache`` finds them where the command line puts them too.
    """
    folder = os.environ.get(STORE_ENV_VARIABLE, "").strip() or DEFAULT_STORE_FOLDER
    return os.path.abspath(os.path.expanduser(folder))


def resolve_cache(cache) -> str | os.PathLike | None:
    """The store folder ``cache`` stands for: :data:`DEFAULT_STORE` ->
    :func:`default_store_folder`; None -> None (no store); a path -> the path. (A sentinel
    object, not a string such as ``"default"``, marks the default, so that every string
    stays a folder name.)"""
    if cache is DEFAULT_STORE:
        return default_store_folder()
    if cache is not None and not isinstance(cache, (str, os.PathLike)):
        raise InputError(f"cache: {cache!r} is not a folder, None (no store) or interkit.DEFAULT_STORE")
    return cache
