"""Electron densities on grids: the deformation density of a counterpoise point.

The dimer and its two ghosted monomers share one atomic-orbital basis (ghost atoms
keep their functions, atom order is kept), so their density matrices add and subtract
directly: Δρ = ρ_AB − ρ_A − ρ_B, all in the dimer basis. Its integral over all space is
N_AB − N_A − N_B = 0.

Grids here are boxes whose first axis runs along the scan direction, so each plane
``values[i]`` is perpendicular to the contact; the plane integrals give the charge
shift along the contact. Lengths are in bohr inside this module (pyscf's unit),
densities in electrons/bohr³; the callers convert for display.
"""

from __future__ import annotations

import base64

import numpy as np
from pyscf.dft import gen_grid, numint

from ..units import ANGSTROM_TO_BOHR

#: grid points per batch when evaluating orbitals (memory: batch × nao × 8 bytes)
BATCH_POINTS = 20000


def encode_matrix(matrix) -> dict:
    """A JSON-safe copy of a float64 array (base64 of its bytes, shape kept)."""
    a = np.ascontiguousarray(np.asarray(matrix, dtype="<f8"))
    return {"dtype": "float64", "shape": list(a.shape), "base64": base64.b64encode(a.tobytes()).decode("ascii")}


def decode_matrix(data: dict) -> np.ndarray:
    """Inverse of :func:`encode_matrix`."""
    raw = base64.b64decode(data["base64"])
    return np.frombuffer(raw, dtype="<f8").reshape(data["shape"]).copy()


def total_density_matrix(dm) -> np.ndarray:
    """Spin-summed AO density matrix (an unrestricted (2, nao, nao) pair is added)."""
    dm = np.asarray(dm, dtype=float)
    return dm[0] + dm[1] if dm.ndim == 3 else dm


def contact_frame(direction) -> np.ndarray:
    """Orthonormal rows (w, u, v): w along ``direction``, u and v perpendicular."""
    w = np.asarray(direction, dtype=float)
    norm = np.linalg.norm(w)
    if not np.isfinite(norm) or norm == 0:
        raise ValueError("the scan direction has zero length")
    w = w / norm
    trial = np.eye(3)[int(np.argmin(np.abs(w)))]
    u = np.cross(w, trial)
    u /= np.linalg.norm(u)
    v = np.cross(w, u)
    return np.array([w, u, v])


def contact_box(coords_bohr, direction, spacing_bohr: float = 0.3, margin_bohr: float = 4.0) -> dict:
    """A box around the atoms with its first axis along ``direction``.

    Parameters
    ----------
    coords_bohr : array, shape (natoms, 3)
        Atom positions (bohr).
    direction : array, shape (3,)
        Scan direction (any length).
    spacing_bohr : float
        Grid step along every axis (bohr).
    margin_bohr : float
        Space left around the outermost atoms (bohr).

    Returns
    -------
    dict
        ``origin`` (3,), ``axes`` (3, 3) step vectors as rows, ``shape`` (3 ints),
        all lengths in bohr.
    """
    frame = contact_frame(direction)
    local = np.asarray(coords_bohr, dtype=float) @ frame.T
    lo, hi = local.min(axis=0) - margin_bohr, local.max(axis=0) + margin_bohr
    shape = np.ceil((hi - lo) / spacing_bohr).astype(int) + 1
    return {"origin": lo @ frame, "axes": frame * spacing_bohr, "shape": [int(n) for n in shape]}


def box_points(box: dict) -> np.ndarray:
    """Every grid point of ``box`` (bohr), first axis slowest, shape (n1*n2*n3, 3)."""
    n1, n2, n3 = box["shape"]
    i, j, k = np.meshgrid(np.arange(n1), np.arange(n2), np.arange(n3), indexing="ij")
    steps = np.stack([i.ravel(), j.ravel(), k.ravel()], axis=1).astype(float)
    return np.asarray(box["origin"]) + steps @ np.asarray(box["axes"])


def voxel_volume(box: dict) -> float:
    """Volume of one grid cell of ``box`` (bohr³)."""
    return float(abs(np.linalg.det(np.asarray(box["axes"]))))


def densities_at(mol, dms, points_bohr) -> list[np.ndarray]:
    """Electron density (electrons/bohr³) of each AO density matrix at the points."""
    mats = [total_density_matrix(dm) for dm in dms]
    out = [np.empty(len(points_bohr)) for _ in mats]
    for start in range(0, len(points_bohr), BATCH_POINTS):
        ao = numint.eval_ao(mol, points_bohr[start:start + BATCH_POINTS], deriv=0)
        for values, dm in zip(out, mats):
            values[start:start + BATCH_POINTS] = numint.eval_rho(mol, ao, dm, xctype="LDA", hermi=1)
    return out


def densities_on_box(mol, dms, box: dict) -> list[np.ndarray]:
    """Densities of ``dms`` on ``box`` (electrons/bohr³), each of shape ``box['shape']``."""
    return [v.reshape(box["shape"]) for v in densities_at(mol, dms, box_points(box))]


def electron_counts(mol, dms, grid_level: int = 3) -> list[float]:
    """Integral of each density over all space on a DFT (Becke) grid (electrons)."""
    grids = gen_grid.Grids(mol)
    grids.level = grid_level
    grids.build(with_non0tab=False)
    return [float(np.dot(rho, grids.weights)) for rho in densities_at(mol, dms, grids.coords)]


def plane_profile(values, box: dict, start_bohr) -> tuple[np.ndarray, np.ndarray]:
    """Integrals of a density over the planes of ``box`` perpendicular to its first axis.

    Parameters
    ----------
    values : array, shape ``box['shape']``
        Density on the box (electrons/bohr³).
    box : dict
        From :func:`contact_box`.
    start_bohr : array, shape (3,)
        Where the position along the contact is zero (e.g. the scan's atom in A).

    Returns
    -------
    position_angstrom : array (n1,)
        Position of each plane along the contact from ``start_bohr`` (angstrom).
    electrons_per_angstrom : array (n1,)
        Plane integral (electrons per angstrom of the contact).
    """
    axes = np.asarray(box["axes"])
    step = float(np.linalg.norm(axes[0]))
    w = axes[0] / step
    area = voxel_volume(box) / step                       # bohr² per cell of one plane
    per_bohr = np.asarray(values).sum(axis=(1, 2)) * area
    s0 = float(np.dot(np.asarray(box["origin"]) - np.asarray(start_bohr, dtype=float), w))
    positions = (s0 + step * np.arange(per_bohr.size)) / ANGSTROM_TO_BOHR
    return positions, per_bohr * ANGSTROM_TO_BOHR         # e/bohr × bohr/Å
