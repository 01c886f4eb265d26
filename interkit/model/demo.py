"""Access to the bundled demo dimers (``demo_systems/`` and its ``catalog.toml``)."""

from __future__ import annotations

import os
import tomllib
from functools import lru_cache
from pathlib import Path

from ..errors import InputError
from .geometry import Dimer

#: the demo that ``interkit demo`` and ``make demo`` run
DEFAULT_DEMO = "water_methanol"


def demo_directory() -> Path:
    """Folder holding the demo XYZ files and ``catalog.toml``."""
    here = Path(__file__).resolve().parent.parent  # the interkit package folder
    for candidate in (here / "_demo_systems", here.parent / "demo_systems"):
        if (candidate / "catalog.toml").is_file():
            return candidate
    raise InputError("demo systems: catalog.toml not found next to the package")


@lru_cache(maxsize=1)
def demo_catalog() -> dict[str, dict]:
    """The demo catalog: name -> entry (file, title, character, fragment_a, charges,
    multiplicities, contact, description)."""
    with open(demo_directory() / "catalog.toml", "rb") as fh:
        return tomllib.load(fh)


def list_demos() -> list[str]:
    """Names of the bundled demo dimers."""
    return sorted(demo_catalog())


def load_demo(name: str, **overrides) -> Dimer:
    """Load a bundled demo dimer by name, with its catalog charges and multiplicities.

    Keyword arguments (``fragment_a``, ``charges``, ``multiplicities``) override the
    catalog entry.
    """
    catalog = demo_catalog()
    if name not in catalog:
        raise InputError(f"system.demo: {name!r} is not a demo system ({', '.join(sorted(catalog))})")
    entry = catalog[name]
    kwargs = {k: entry[k] for k in ("fragment_a", "charges", "multiplicities") if k in entry}
    kwargs.update(overrides)
    return Dimer.from_xyz(os.path.join(demo_directory(), entry["file"]), name=name, **kwargs)
