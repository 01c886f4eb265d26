"""Volumetric data as cube text (the widely read format): write and read back.

Layout: two comment lines; the atom count and the grid origin (bohr); for each of the
three grid axes the number of points and the step vector (bohr); one line per atom
(atomic number, charge, position in bohr); then the values, the last axis fastest,
six per line. Our grids may have axes that are not the Cartesian ones (the first axis
runs along the scan direction); readers that honour the step vectors draw them right.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from pyscf.data import elements


@dataclass
class CubeData:
    """A parsed cube: positions and steps in bohr, ``values`` of shape ``shape``."""

    comments: tuple[str, str]
    atomic_numbers: np.ndarray
    atom_positions_bohr: np.ndarray
    origin_bohr: np.ndarray
    axes_bohr: np.ndarray
    values: np.ndarray

    @property
    def shape(self) -> tuple[int, int, int]:
        return tuple(self.values.shape)

    @property
    def voxel_volume_bohr3(self) -> float:
        return float(abs(np.linalg.det(self.axes_bohr)))


def cube_text(symbols, positions_bohr, box: dict, values, comments: tuple[str, str]) -> str:
    """Cube text of ``values`` on ``box`` (see :func:`interkit.engine.density.contact_box`).

    Parameters
    ----------
    symbols : sequence of str
        Elements of the atoms listed in the header (real atoms).
    positions_bohr : array, shape (natoms, 3)
    box : dict
        ``origin``, ``axes`` (rows: step vectors) and ``shape``, in bohr.
    values : array, shape ``box['shape']``
        The volumetric values (e.g. electrons/bohr³).
    comments : (str, str)
        The two header lines (say what the values are and their unit).
    """
    values = np.asarray(values, dtype=float)
    if tuple(values.shape) != tuple(box["shape"]):
        raise ValueError(f"values of shape {values.shape} do not fit the box {box['shape']}")
    pos = np.asarray(positions_bohr, dtype=float)
    lines = [c.replace("\n", " ") for c in comments]
    o = np.asarray(box["origin"], dtype=float)
    lines.append(f"{len(symbols):5d} {o[0]:12.6f} {o[1]:12.6f} {o[2]:12.6f}")
    for n, step in zip(box["shape"], np.asarray(box["axes"], dtype=float)):
        lines.append(f"{int(n):5d} {step[0]:12.6f} {step[1]:12.6f} {step[2]:12.6f}")
    for sym, p in zip(symbols, pos):
        z = elements.charge(sym)
        lines.append(f"{z:5d} {float(z):12.6f} {p[0]:12.6f} {p[1]:12.6f} {p[2]:12.6f}")
    flat = values.reshape(-1, values.shape[2])
    body = []
    for row in flat:   # each run along the last axis starts a new line
        for k in range(0, row.size, 6):
            body.append(" ".join(f"{x:13.5E}" for x in row[k:k + 6]))
    return "\n".join(lines + body) + "\n"


def read_cube(text: str) -> CubeData:
    """Parse cube text written by :func:`cube_text` (or any plain cube file)."""
    lines = text.splitlines()
    head = lines[2].split()
    natoms = int(head[0])
    if natoms < 0:
        raise ValueError("cube files with orbital lists (negative atom count) are not read here")
    origin = np.array([float(x) for x in head[1:4]])
    shape, axes = [], []
    for line in lines[3:6]:
        parts = line.split()
        shape.append(int(parts[0]))
        axes.append([float(x) for x in parts[1:4]])
    atoms = [line.split() for line in lines[6:6 + natoms]]
    numbers = np.array([int(a[0]) for a in atoms])
    positions = np.array([[float(x) for x in a[2:5]] for a in atoms]).reshape(natoms, 3)
    values = np.array(" ".join(lines[6 + natoms:]).split(), dtype=float)
    n = int(np.prod(shape))
    if values.size != n:
        raise ValueError(f"cube holds {values.size} values, its grid {shape} needs {n}")
    return CubeData((lines[0], lines[1]), numbers, positions, origin, np.array(axes), values.reshape(shape))
