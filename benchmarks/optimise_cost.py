"""Gradient evaluations of a rigid-body optimisation: interkit's optimiser against SciPy BFGS.

Both minimise the same function in the same run: the counterpoise-corrected interaction
energy of the S22 water dimer (default HF/def2-SVP) from four starts (B displaced by
0.3 Å along O···O and turned by 15° about z, as in the optimiser test; then 15° about x;
0.3 Å across with 15° about y; 0.2 Å closer with 20° about (1, 1, 1)), each evaluation
one ``forces=True`` calculation through :class:`interkit.run.optimise.RigidBodyEnergy`,
from a fresh store for each optimiser and start (nothing reused). One start is a noisy
measure (counts of 6 to 12); the ratio is that of the totals.

* interkit: :func:`interkit.run.optimise.optimise_dimer` with its default thresholds.
* SciPy: ``scipy.optimize.minimize(method="BFGS")`` in Cartesian translation (Å) +
  rotation-vector (rad) coordinates of B about its starting centre of mass, with the
  analytic gradient ``(-F_B, -J(w)^T tau_B)`` (J the left Jacobian of the rotation
  vector) from the same force and torque. It stops at the first evaluated point that
  meets interkit's force and torque thresholds and lies within the energy threshold of
  interkit's final energy (fairer to SciPy than its own ``gtol`` rule, which stops
  early at a higher energy).

Prints the counts per start, the totals and their ratio (target: SciPy / interkit >= 1.5).
"""

from __future__ import annotations

import argparse
import json
import tempfile
import time

import numpy as np
from scipy.optimize import minimize

from interkit.model.rigid import left_jacobian, moved_b
from interkit.model.s22 import s22_dimer
from interkit.run.optimise import (
    DEFAULT_ENERGY_TOL_KCAL_PER_MOL,
    DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM,
    DEFAULT_TORQUE_TOL_KCAL_PER_MOL,
    RigidBodyEnergy,
    optimise_dimer,
)


class _Done(Exception):
    pass


def start_geometry(which: int = 0):
    """Start ``which`` (0..3) of the module text."""
    d = s22_dimer("Water_dimer")
    oo = d.coordinates[3] - d.coordinates[0]
    oo = oo / np.linalg.norm(oo)
    across = np.cross(oo, [0.0, 0.0, 1.0])
    across /= np.linalg.norm(across)
    moves = [(0.3 * oo, [0.0, 0.0, 1.0], 15.0), (0.3 * oo, [1.0, 0.0, 0.0], 15.0),
             (0.3 * across, [0.0, 1.0, 0.0], 15.0), (-0.2 * oo, np.ones(3) / np.sqrt(3.0), 20.0)]
    shift, axis, degrees = moves[which]
    return moved_b(d, shift, np.deg2rad(degrees) * np.asarray(axis))


def compare(start, level: str) -> dict:
    """Evaluations of both optimisers from ``start``."""
    with tempfile.TemporaryDirectory() as store_a, tempfile.TemporaryDirectory() as store_b:
        t0 = time.perf_counter()
        ours = optimise_dimer(start, level, cache=store_a)
        t_ours = time.perf_counter() - t0
        fn = RigidBodyEnergy(level, cache=store_b)
        seen = {"best": np.inf, "n": 0, "e": np.nan}

        def fg(x):
            ev = fn(moved_b(start, x[:3], x[3:]))
            seen["n"] += 1
            seen["best"] = min(seen["best"], ev.e_int)
            if (np.linalg.norm(ev.force) <= DEFAULT_FORCE_TOL_KCAL_PER_MOL_PER_ANGSTROM
                    and np.linalg.norm(ev.torque) <= DEFAULT_TORQUE_TOL_KCAL_PER_MOL
                    and ev.e_int <= ours.e_int_kcal_per_mol + DEFAULT_ENERGY_TOL_KCAL_PER_MOL):
                seen["e"] = ev.e_int
                raise _Done
            return ev.e_int, np.concatenate([-ev.force, -left_jacobian(x[3:]).T @ ev.torque])

        t0 = time.perf_counter()
        try:
            res = minimize(fg, np.zeros(6), jac=True, method="BFGS", options={"gtol": 1e-6, "maxiter": 200})
            note = f"stopped by SciPy: {res.message}"
        except _Done:
            note = "reached interkit's thresholds"
        t_scipy = time.perf_counter() - t0
    return {
        "interkit_evaluations": ours.evaluations,
        "interkit_converged": ours.converged,
        "interkit_e_int_kcal_per_mol": ours.e_int_kcal_per_mol,
        "scipy_bfgs_evaluations": seen["n"],
        "scipy_e_int_kcal_per_mol": seen["e"] if np.isfinite(seen["e"]) else seen["best"],
        "scipy_note": note,
        "wall_time_interkit_s": t_ours,
        "wall_time_scipy_s": t_scipy,
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--level", default="hf/def2-svp")
    ap.add_argument("--starts", type=int, default=4, help="how many of the four starts (default 4)")
    ap.add_argument("--json", default=None, help="also write the numbers to this JSON file")
    args = ap.parse_args()
    print(f"level {args.level}: S22 water dimer, B moved and turned (starts of the module text)")
    rows = []
    for k in range(args.starts):
        row = compare(start_geometry(k), args.level)
        rows.append(row)
        print(f"start {k}: interkit {row['interkit_evaluations']:3d} evaluations (E_int "
              f"{row['interkit_e_int_kcal_per_mol']:.5f} kcal/mol, converged {row['interkit_converged']}), "
              f"SciPy BFGS {row['scipy_bfgs_evaluations']:3d} (E_int {row['scipy_e_int_kcal_per_mol']:.5f}, "
              f"{row['scipy_note']})", flush=True)
    n_ours = sum(r["interkit_evaluations"] for r in rows)
    n_scipy = sum(r["scipy_bfgs_evaluations"] for r in rows)
    print(f"total: interkit {n_ours}, SciPy BFGS {n_scipy}; per optimisation {n_ours / len(rows):.2f} "
          f"and {n_scipy / len(rows):.2f}; ratio SciPy / interkit {n_scipy / n_ours:.2f} (target >= 1.5)")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump({"level": args.level, "starts": rows, "ratio_scipy_over_interkit": n_scipy / n_ours},
                      fh, indent=2)


if __name__ == "__main__":
    main()
