"""Grid error of counterpoise interaction energies and forces: coarse DFT grids
against a very fine one.

For each dimer and functional (def2-SVP, interkit's defaults otherwise: density
fitting, NWChem pruning, no density screening of grid points) the scan is run with
``grid_level`` 0-3 and with a reference level (default 8). Printed per grid level:
grid points of the dimer, the largest |ΔE_int|, |ΔE_int_nocp| (kcal/mol) over the
points, the largest per-atom |ΔF| and |Δforce_along| (kcal/mol/angstrom) at the
force point, and the same |ΔE_int| when every calculation has only its real atoms'
grid ("unshared": ghost atoms carry no grid points, computed with pyscf directly).

Shared grids are what interkit does: ghost atoms keep their grid, so the dimer and
both ghosted monomers of a point integrate on the same points and the errors cancel.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

import interkit as ik
from interkit.units import ANGSTROM_TO_BOHR, HARTREE_TO_KCAL_PER_MOL


def shared(system: str, functional: str, grid: int, factors, force_factor, basis="def2-svp"):
    dimer = ik.load_demo(system)
    contact = ik.demo_catalog()[system]["contact"]
    level = f"{functional}/{basis} (grid {grid})"
    t0 = time.perf_counter()
    ds = ik.run_scan(ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=list(factors),
                                 levels=[level]), executor="serial", progress=False)
    t_e = time.perf_counter() - t0
    out = {"e_int": ds["e_int"].values[0].tolist(), "e_int_nocp": ds["e_int_nocp"].values[0].tolist(),
           "time_energy_s": t_e}
    if force_factor is not None:
        t0 = time.perf_counter()
        ds = ik.run_scan(ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=[force_factor],
                                     levels=[level], forces=True), executor="serial", progress=False)
        out["time_force_s"] = time.perf_counter() - t0
        out["forces"] = ds["forces"].values[0, 0].tolist()
        out["force_along"] = float(ds["force_along"].values[0, 0])
    return out


def unshared_e_int(system: str, functional: str, grid: int, factors, basis="def2-svp"):
    """CP E_int (kcal/mol) where each calculation integrates on its real atoms' grid only."""
    from pyscf import dft, gto

    dimer = ik.load_demo(system)
    contact = ik.demo_catalog()[system]["contact"]
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(*contact), factors=list(factors), levels=["hf/sto-3g"])
    out = []
    for point in spec.points:
        d = point.dimer
        a, b = list(d.fragment_a), list(d.fragment_b)

        def energy(real, d=d):
            atoms = [(("" if i in real else "ghost-") + d.symbols[i],
                      tuple(float(x) * ANGSTROM_TO_BOHR for x in d.coordinates[i])) for i in range(d.natoms)]
            mol = gto.M(atom=atoms, basis=basis, unit="Bohr", verbose=0)
            real_mol = gto.M(atom=[atoms[i] for i in sorted(real)], basis=basis, unit="Bohr", verbose=0)
            mf = dft.RKS(mol, xc=functional).density_fit()
            mf.small_rho_cutoff = 0.0
            g = dft.gen_grid.Grids(real_mol)
            g.level, g.prune = grid, dft.gen_grid.nwchem_prune
            g.build(with_non0tab=False)
            g.mol = mol
            g.non0tab = g.make_mask(mol, g.coords)
            g.screen_index = g.non0tab
            mf.grids = g
            mf.conv_tol = 1e-10
            return mf.kernel()

        e = energy(a + b) - energy(a) - energy(b)
        out.append(e * HARTREE_TO_KCAL_PER_MOL)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--systems", default="water_methanol,formaldehyde_water")
    parser.add_argument("--functionals", default="b3lyp,pbe0")
    parser.add_argument("--grids", default="0,1,2,3")
    parser.add_argument("--reference", type=int, default=8)
    parser.add_argument("--factors", default="0.9,1.0,1.25")
    parser.add_argument("--force-factor", type=float, default=1.0)
    parser.add_argument("--no-unshared", action="store_true")
    parser.add_argument("--json", default=None)
    args = parser.parse_args()
    factors = [float(x) for x in args.factors.split(",")]
    grids = [int(x) for x in args.grids.split(",")]
    results = {}
    for system in args.systems.split(","):
        for xc in args.functionals.split(","):
            case = {}
            for grid in grids + [args.reference]:
                case[grid] = shared(system, xc, grid, factors, args.force_factor)
                if not args.no_unshared:
                    case[grid]["e_int_unshared"] = unshared_e_int(system, xc, grid, factors)
                print(system, xc, grid, json.dumps(case[grid]), flush=True)
            results[f"{system}/{xc}"] = case
            ref = case[args.reference]
            print(f"\n{system}  {xc}/def2-svp  reference grid {args.reference}")
            print("grid  |dE_int|  |dE_int_nocp|  |dF_atom|  |dF_along|  |dE_int| unshared  t_energy/t_ref")
            for grid in grids:
                c = case[grid]
                de = np.max(np.abs(np.subtract(c["e_int"], ref["e_int"])))
                dn = np.max(np.abs(np.subtract(c["e_int_nocp"], ref["e_int_nocp"])))
                df = np.max(np.abs(np.subtract(c["forces"], ref["forces"]))) if "forces" in c else np.nan
                da = abs(c["force_along"] - ref["force_along"]) if "forces" in c else np.nan
                du = (np.max(np.abs(np.subtract(c["e_int_unshared"], ref["e_int_unshared"])))
                      if "e_int_unshared" in c else np.nan)
                print(f"{grid:4d}  {de:8.5f}  {dn:12.5f}  {df:9.5f}  {da:10.5f}  {du:17.5f}  "
                      f"{c['time_energy_s'] / ref['time_energy_s']:6.2f}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(results, fh, indent=1)


if __name__ == "__main__":
    main()
