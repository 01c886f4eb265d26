"""Rebuild the interkit demo dimers in this directory.

Each dimer is assembled from hand-built monomers (textbook-like bond lengths and
angles), placed in a chemically sensible contact orientation and then optimised
at B3LYP-D3(BJ)/def2-SVP with density fitting, using geomeTRIC through pyscf.
The benzene-pyridine stack is treated differently (rigid optimised monomers,
1-D scan of the interplanar distance), see ``build_benzene_pyridine``.

Usage (from anywhere)::

    OMP_NUM_THREADS=1 /work/main/.venv/bin/python build_geometries.py [name ...]

Without arguments every system is rebuilt; with names only those are.
``--lithium-free`` instead runs the unconstrained Li+-water optimisation
that the README quotes for comparison (nothing is written).  The
script writes ``<name>.xyz`` files and regenerates ``catalog.toml`` from the
XYZ files that exist.  geomeTRIC is needed only here, it is a data-building
tool and not a dependency of interkit.  Timings go to standard output.
"""

import os
import sys
import tempfile
import time

import numpy as np
from pyscf import dft, gto, lib
from pyscf.geomopt.geometric_solver import optimize

HERE = os.path.dirname(os.path.abspath(__file__))
XC = "b3lyp-d3bj"
BASIS = "def2-svp"
LEVEL = "B3LYP-D3(BJ)/def2-SVP"
MAXSTEPS = 60


# ---------------------------------------------------------------------------
# small geometry helpers
# ---------------------------------------------------------------------------

def unit(v):
    """Return v / |v|."""
    v = np.asarray(v, dtype=float)
    return v / np.linalg.norm(v)


def zmatrix(rows):
    """Cartesian coordinates (Angstrom) from a simple Z-matrix.

    ``rows`` is a list of ``(symbol, (i, r), (j, angle), (k, dihedral))`` with
    0-based reference indices; the first atoms use only the leading entries.
    """
    syms, xyz = [], []
    for n, row in enumerate(rows):
        sym = row[0]
        if n == 0:
            pos = np.zeros(3)
        elif n == 1:
            pos = xyz[row[1][0]] + np.array([0.0, 0.0, row[1][1]])
        else:
            (i, r), (j, ang) = row[1], row[2]
            if len(row) > 3:
                k, dih = row[3]
                ref = xyz[k]
            else:
                dih = 0.0
                # any reference not collinear with i-j
                ref = xyz[j] + np.array([1.0, 0.37, 0.0])
            a, b, c = ref, xyz[j], xyz[i]
            bc = unit(c - b)
            nrm = unit(np.cross(b - a, bc))
            m = np.cross(nrm, bc)
            ang, dih = np.radians(ang), np.radians(dih)
            d2 = np.array([-r * np.cos(ang),
                           r * np.sin(ang) * np.cos(dih),
                           r * np.sin(ang) * np.sin(dih)])
            pos = c + d2[0] * bc + d2[1] * m + d2[2] * nrm
        syms.append(sym)
        xyz.append(np.asarray(pos, dtype=float))
    return syms, np.array(xyz)


def rotation_onto(a, b):
    """Rotation matrix taking direction a onto direction b (Rodrigues)."""
    a, b = unit(a), unit(b)
    v = np.cross(a, b)
    c = float(np.dot(a, b))
    if np.linalg.norm(v) < 1e-10:
        if c > 0:
            return np.eye(3)
        # 180 degrees about any axis perpendicular to a
        p = unit(np.cross(a, [1.0, 0.0, 0.0] if abs(a[0]) < 0.9 else [0.0, 1.0, 0.0]))
        return 2.0 * np.outer(p, p) - np.eye(3)
    vx = np.array([[0, -v[2], v[1]], [v[2], 0, -v[0]], [-v[1], v[0], 0]])
    return np.eye(3) + vx + vx @ vx * (1.0 / (1.0 + c))


def sp3_lone_pair(xyz, centre, n1, n2):
    """Direction of one lone pair of a two-coordinate sp3 O (tetrahedral guess)."""
    u1 = unit(xyz[n1] - xyz[centre])
    u2 = unit(xyz[n2] - xyz[centre])
    bis = -unit(u1 + u2)
    perp = unit(np.cross(u1, u2))
    return unit(np.cos(np.radians(54.75)) * bis + np.sin(np.radians(54.75)) * perp)


def sp2_lone_pair(xyz, centre, partner, in_plane_atom):
    """Direction of an in-plane lone pair of a carbonyl O (120 deg from C=O)."""
    u = unit(xyz[centre] - xyz[partner])            # C -> O
    w = xyz[in_plane_atom] - xyz[partner]
    w = unit(w - np.dot(w, u) * u)                  # in-plane, perpendicular to C=O
    return unit(np.cos(np.radians(60)) * u + np.sin(np.radians(60)) * w)


def dock_donor(donor_xyz, d_idx, h_idx, acc_xyz, a_idx, lp, r_ha):
    """Move a donor so that D-H points along the acceptor lone pair ``lp``.

    The donor H ends up at ``acc[a_idx] + r_ha * lp`` and the D-H...A angle is
    linear.  Returns the transformed donor coordinates.
    """
    rot = rotation_onto(donor_xyz[h_idx] - donor_xyz[d_idx], -np.asarray(lp))
    moved = (donor_xyz - donor_xyz[h_idx]) @ rot.T
    return moved + acc_xyz[a_idx] + r_ha * unit(lp)


# ---------------------------------------------------------------------------
# monomers (textbook-like internal coordinates)
# ---------------------------------------------------------------------------

def water():
    """O, H, H with r(OH) = 0.96 A and angle 104.5 deg."""
    return zmatrix([("O",), ("H", (0, 0.96)), ("H", (0, 0.96), (1, 104.5))])


def methanol():
    """O, H(O), C, H, H, H; staggered methyl."""
    return zmatrix([
        ("O",),
        ("H", (0, 0.96)),
        ("C", (0, 1.43), (1, 108.5)),
        ("H", (2, 1.09), (0, 109.5), (1, 180.0)),
        ("H", (2, 1.09), (0, 109.5), (1, 60.0)),
        ("H", (2, 1.09), (0, 109.5), (1, -60.0)),
    ])


def formaldehyde():
    """O, C, H, H (planar)."""
    return zmatrix([
        ("O",),
        ("C", (0, 1.21)),
        ("H", (1, 1.10), (0, 121.8)),
        ("H", (1, 1.10), (0, 121.8), (2, 180.0)),
    ])


def n_methylacetamide():
    """trans-N-methylacetamide: O, C, N, H(N), C(N-methyl), C(acetyl), then the methyl
    hydrogens (N-methyl first); O=C-N-H anti, O=C-N-C(methyl) syn (the trans amide)."""
    return zmatrix([
        ("O",),
        ("C", (0, 1.23)),
        ("N", (1, 1.35), (0, 122.5)),
        ("H", (2, 1.01), (1, 119.0), (0, 180.0)),
        ("C", (2, 1.45), (1, 122.0), (0, 0.0)),
        ("C", (1, 1.51), (0, 121.0), (2, 180.0)),
        ("H", (4, 1.09), (2, 109.5), (1, 180.0)),
        ("H", (4, 1.09), (2, 109.5), (1, 60.0)),
        ("H", (4, 1.09), (2, 109.5), (1, -60.0)),
        ("H", (5, 1.09), (1, 109.5), (0, 0.0)),
        ("H", (5, 1.09), (1, 109.5), (0, 120.0)),
        ("H", (5, 1.09), (1, 109.5), (0, -120.0)),
    ])


def ethene():
    """C=C along x in the xy plane, centred at the origin."""
    cc, ch, ang = 1.33, 1.085, np.radians(121.5)
    x0 = cc / 2
    dx, dy = -ch * np.cos(ang), ch * np.sin(ang)
    syms = ["C", "C", "H", "H", "H", "H"]
    xyz = np.array([[-x0, 0, 0], [x0, 0, 0],
                    [-x0 - dx, dy, 0], [-x0 - dx, -dy, 0],
                    [x0 + dx, dy, 0], [x0 + dx, -dy, 0]], dtype=float)
    return syms, xyz


def methane():
    """Tetrahedral CH4, one C-H pointing along -z (that H is atom 1)."""
    r = 1.09
    t = np.degrees(np.arccos(-1.0 / 3.0))
    syms = ["C", "H", "H", "H", "H"]
    xyz = [[0, 0, 0], [0, 0, -r]]
    for phi in (0.0, 120.0, 240.0):
        th, ph = np.radians(180.0 - t), np.radians(phi)
        xyz.append([r * np.sin(th) * np.cos(ph), r * np.sin(th) * np.sin(ph),
                    r * np.cos(th)])
    return syms, np.array(xyz, dtype=float)


def hexagon(symbols, r_ring=1.39, r_h=1.08):
    """Planar six-ring in the xy plane; ring atom k at angle 60k deg.

    ``symbols`` gives the six ring atoms; C gets an H, N does not.  Ring atoms
    come first, then the hydrogens in ring order.
    """
    ring, hyd = [], []
    for k, s in enumerate(symbols):
        a = np.radians(60.0 * k)
        d = np.array([np.cos(a), np.sin(a), 0.0])
        ring.append((s, r_ring * d))
        if s == "C":
            hyd.append(("H", (r_ring + r_h) * d))
    atoms = ring + hyd
    return [a[0] for a in atoms], np.array([a[1] for a in atoms])


def hydroxyl():
    """OH radical, r = 0.97 A."""
    return zmatrix([("O",), ("H", (0, 0.97))])


# ---------------------------------------------------------------------------
# quantum chemistry
# ---------------------------------------------------------------------------

def make_mf(symbols, xyz, charge=0, spin=0):
    """DF-B3LYP-D3(BJ)/def2-SVP mean-field object (RKS, or UKS if spin > 0)."""
    mol = gto.M(atom=list(zip(symbols, map(tuple, xyz))), basis=BASIS,
                charge=charge, spin=spin, unit="Angstrom", verbose=0)
    cls = dft.UKS if spin else dft.RKS
    mf = cls(mol, xc=XC).density_fit()
    mf.conv_tol = 1e-9
    mf.max_cycle = 200
    return mf


def optimise(symbols, xyz, charge=0, spin=0, constraints=None):
    """Optimise with geomeTRIC (default criteria, <= MAXSTEPS steps).

    ``constraints`` is the text of a geomeTRIC constraints file (1-based
    atom numbers) or None.  geomeTRIC scratch files go to a temporary
    directory.  Returns the optimised coordinates in Angstrom.
    """
    mf = make_mf(symbols, xyz, charge, spin)
    cwd = os.getcwd()
    with tempfile.TemporaryDirectory() as tmp:
        os.chdir(tmp)
        try:
            cfile = None
            if constraints:
                cfile = os.path.join(tmp, "constraints.txt")
                with open(cfile, "w") as fh:
                    fh.write(constraints)
            mol_eq = optimize(mf, maxsteps=MAXSTEPS, constraints=cfile)
        finally:
            os.chdir(cwd)
    return mol_eq.atom_coords(unit="Angstrom")


def energy(symbols, xyz, charge=0, spin=0):
    """Single-point DF-B3LYP-D3(BJ)/def2-SVP energy (Hartree)."""
    mf = make_mf(symbols, xyz, charge, spin)
    e = mf.kernel()
    if not mf.converged:
        raise RuntimeError("SCF did not converge")
    return e


# ---------------------------------------------------------------------------
# the systems
# ---------------------------------------------------------------------------

def build_water_methanol():
    """Water (A) donates an O-H hydrogen bond to the methanol O (B)."""
    ws, wx = water()
    ms, mx = methanol()
    lp = sp3_lone_pair(mx, 0, 1, 2)
    wx = dock_donor(wx, 0, 1, mx, 0, lp, 1.95)
    return ws + ms, np.vstack([wx, mx]), 3, [0, 0], [1, 1], (1, 3)


def build_formaldehyde_water():
    """Water (B) donates an O-H hydrogen bond to the carbonyl O of formaldehyde (A)."""
    fs, fx = formaldehyde()
    ws, wx = water()
    lp = sp2_lone_pair(fx, 0, 1, 2)
    wx = dock_donor(wx, 0, 1, fx, 0, lp, 1.95)
    return fs + ws, np.vstack([fx, wx]), 4, [0, 0], [1, 1], (0, 5)


def build_nma_water():
    """Water (B) donates an O-H hydrogen bond to the amide carbonyl O of
    N-methylacetamide (A), the lone pair on the N side (a peptide-like contact)."""
    ns, nx = n_methylacetamide()
    ws, wx = water()
    lp = sp2_lone_pair(nx, 0, 1, 2)
    wx = dock_donor(wx, 0, 1, nx, 0, lp, 1.95)
    # turn the water about its O-H...O axis so its free H stays clear of the N-methyl group
    axis, pivot = unit(wx[1] - wx[0]), wx[1]
    best, best_gap = wx, -1.0
    for ang in np.radians(np.arange(0.0, 360.0, 15.0)):
        k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
        rot = np.eye(3) + np.sin(ang) * k + (1 - np.cos(ang)) * k @ k
        trial = (wx - pivot) @ rot.T + pivot
        gap = np.linalg.norm(nx[:, None] - trial[None, [0, 2]], axis=2).min()
        if gap > best_gap:
            best, best_gap = trial, gap
    return ns + ws, np.vstack([nx, best]), 12, [0, 0], [1, 1], (0, 13)


def build_methane_ethene():
    """Methane (B) points one C-H at the C=C midpoint of ethene (A)."""
    es, ex = ethene()
    ms, mx = methane()
    mx = mx + np.array([0.0, 0.0, 2.65 + 1.09])   # H...midpoint 2.65 A
    return es + ms, np.vstack([ex, mx]), 6, [0, 0], [1, 1], (0, 7)


def build_lithium_water():
    """Li+ (A) on the C2 axis of water (B), Li...O held at 2.45 A.

    The free optimum (about 1.85 A at this level) is shorter than
    1.2 x (r_cov(Li) + r_cov(O)) = 2.33 A, so a covalent-radius connectivity
    test would fuse the fragments.  The Li...O distance is therefore frozen
    at 2.45 A and only the water relaxes; a scan along the contact pair
    reaches the minimum from there.
    """
    ws, wx = water()
    bis = -unit((wx[1] - wx[0]) + (wx[2] - wx[0]))
    li = wx[0] + 2.45 * bis
    cons = "$freeze\ndistance 1 2\n"
    return ["Li"] + ws, np.vstack([li, wx]), 1, [1, 0], [1, 1], (0, 1), cons


def lithium_water_free_optimum():
    """Unconstrained Li+-water optimisation, for reference only (not written).

    Returns the free optimum Li...O distance in Angstrom; used to document
    how far the frozen 2.45 A demo geometry is from the minimum.
    """
    syms, xyz = build_lithium_water()[:2]
    xyz = optimise(syms, xyz, charge=1, spin=0)
    return float(np.linalg.norm(xyz[0] - xyz[1]))


def build_chloride_water():
    """Cl- (A) accepts one O-H hydrogen bond from water (B)."""
    ws, wx = water()
    cl = np.zeros((1, 3))
    wx = dock_donor(wx, 0, 1, cl, 0, [0.0, 0.0, 1.0], 2.15)
    return ["Cl"] + ws, np.vstack([cl, wx]), 1, [-1, 0], [1, 1], (0, 2)


def build_hydroxyl_water():
    """OH radical (A, doublet) donates its O-H to the water O (B)."""
    hs, hx = hydroxyl()
    ws, wx = water()
    lp = sp3_lone_pair(wx, 0, 1, 2)
    hx = dock_donor(hx, 0, 1, wx, 0, lp, 1.90)
    return hs + ws, np.vstack([hx, wx]), 2, [0, 0], [2, 1], (1, 2)


def centre_on_ring(xyz, ring):
    """Put the ring centroid at the origin and the ring plane normal on z."""
    xyz = xyz - xyz[ring].mean(axis=0)
    _, _, vt = np.linalg.svd(xyz[ring])
    return xyz @ rotation_onto(vt[2], [0.0, 0.0, 1.0]).T


def build_benzene_pyridine(log):
    """Parallel-displaced benzene (A) / pyridine (B) stack.

    Both monomers are optimised on their own, then stacked with parallel
    ring planes, the pyridine centroid shifted by 1.5 A along the benzene
    x axis (N on the far side).  The interplanar distance is scanned from
    3.2 to 3.9 A in 0.1 A steps (rigid monomers, plain supermolecular energy,
    no counterpoise) and set to the minimum of a parabola through the lowest
    point and its neighbours.
    """
    bs, bx = hexagon(["C"] * 6)
    ps, px = hexagon(["N", "C", "C", "C", "C", "C"])
    px[0] *= 1.34 / 1.39                    # slightly shorter C-N guess
    t0 = time.time()
    bx = centre_on_ring(optimise(bs, bx), list(range(6)))
    px = centre_on_ring(optimise(ps, px), list(range(6)))
    log("  monomer optimisations: %.0f s" % (time.time() - t0))
    # benzene: atom 0 on +x; pyridine: N on +x, then rotate pyridine so its
    # N points along +x exactly and benzene C0 along +x.
    for arr in (bx, px):
        ang = np.arctan2(arr[0, 1], arr[0, 0])
        c, s = np.cos(-ang), np.sin(-ang)
        arr[:] = arr @ np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]]).T
    offset = np.array([1.5, 0.0, 0.0])
    syms = bs + ps

    def stack(d):
        return np.vstack([bx, px + offset + np.array([0.0, 0.0, d])])

    grid = np.round(np.arange(3.2, 3.95, 0.1), 2)
    energies = []
    for d in grid:
        t1 = time.time()
        energies.append(energy(syms, stack(d)))
        log("  d = %.2f A  E = %.8f Eh  (%.0f s)" % (d, energies[-1], time.time() - t1))
    energies = np.array(energies)
    i = int(np.clip(np.argmin(energies), 1, len(grid) - 2))
    c2, c1, _ = np.polyfit(grid[i - 1:i + 2], energies[i - 1:i + 2], 2)
    d_min = float(-c1 / (2 * c2))
    log("  parabola minimum: d = %.3f A" % d_min)
    xyz = stack(round(d_min, 3))
    # contact: closest A/B pair
    dm = np.linalg.norm(xyz[:12, None] - xyz[None, 12:], axis=2)
    ia, ib = np.unravel_index(np.argmin(dm), dm.shape)
    return syms, xyz, 12, [0, 0], [1, 1], (int(ia), int(ib) + 12), d_min


# name -> (builder, title, character, catalog description)
SYSTEMS = {
    "water_methanol": (
        build_water_methanol, "Water–methanol hydrogen bond", "hydrogen bond",
        "Default demo: water (A) donates an O–H···O hydrogen bond to the methanol "
        "oxygen (B). Built from textbook monomers and fully optimised at "
        "B3LYP-D3(BJ)/def2-SVP (density fitting) with geomeTRIC."),
    "formaldehyde_water": (
        build_formaldehyde_water, "Formaldehyde–water hydrogen bond", "hydrogen bond",
        "Water (B) donates an O–H···O=C hydrogen bond to the carbonyl oxygen of "
        "formaldehyde (A), an sp2 acceptor. Fully optimised at "
        "B3LYP-D3(BJ)/def2-SVP (density fitting) with geomeTRIC."),
    "methane_ethene": (
        build_methane_ethene, "Methane above the ethene π bond", "dispersion (CH–π)",
        "A weak, dispersion-dominated contact: one methane C–H (B) points at the "
        "C=C π bond of ethene (A). Fully optimised at B3LYP-D3(BJ)/def2-SVP "
        "(density fitting) with geomeTRIC."),
    "nma_water": (
        build_nma_water, "N-methylacetamide–water hydrogen bond", "hydrogen bond (amide)",
        "A peptide-like contact: water (B) donates an O–H···O=C hydrogen bond to the "
        "carbonyl oxygen of trans-N-methylacetamide (A). Built from textbook monomers "
        "and fully optimised at B3LYP-D3(BJ)/def2-SVP (density fitting) with geomeTRIC."),
    "benzene_pyridine": (
        build_benzene_pyridine, "Parallel-displaced benzene–pyridine stack", "π-stacking",
        "Benzene (A) and pyridine (B) stacked with parallel rings, pyridine shifted "
        "by 1.5 Å in-plane. Rigid monomers optimised at B3LYP-D3(BJ)/def2-SVP; the "
        "interplanar distance comes from a 1-D scan at the same level."),
    "lithium_water": (
        build_lithium_water, "Li+ ··· water", "ion–neutral",
        "Cation–neutral contact: Li+ (A, charge +1) sits on the C2 axis of water "
        "(B) facing the oxygen. Li···O frozen at 2.45 Å (longer than the free "
        "optimum so the fragments stay separable by covalent radii), water relaxed "
        "at B3LYP-D3(BJ)/def2-SVP with geomeTRIC."),
    "chloride_water": (
        build_chloride_water, "Chloride ··· water", "ion–neutral",
        "Anion–neutral contact: chloride (A, charge −1) accepts one O–H···Cl− "
        "hydrogen bond from water (B). Fully optimised at B3LYP-D3(BJ)/def2-SVP "
        "(density fitting) with geomeTRIC; no diffuse functions."),
    "hydroxyl_water": (
        build_hydroxyl_water, "Hydroxyl radical ··· water", "open-shell",
        "Open-shell case: the OH radical (A, doublet) donates an O–H···O hydrogen "
        "bond to closed-shell water (B). Fully optimised with unrestricted "
        "B3LYP-D3(BJ)/def2-SVP (density fitting) and geomeTRIC."),
}

COMMENT = "%s, %s, interkit demo"


def write_xyz(path, symbols, xyz, comment):
    """Write a standard XYZ file, coordinates in Angstrom with 8 decimals."""
    with open(path, "w") as fh:
        fh.write("%d\n%s\n" % (len(symbols), comment))
        for s, (x, y, z) in zip(symbols, np.asarray(xyz, dtype=float) + 0.0):
            fh.write("%-2s %16.8f %16.8f %16.8f\n" % (s, x, y, z))


def build(name, log=print):
    """Build, optimise and write one system; return its catalog metadata."""
    builder = SYSTEMS[name][0]
    t0 = time.time()
    if name == "benzene_pyridine":
        syms, xyz, n_a, charges, mults, contact, _ = builder(log)
        how = "monomers optimised, interplanar distance scanned, " + LEVEL
    else:
        out = builder()
        syms, xyz0, n_a, charges, mults, contact = out[:6]
        cons = out[6] if len(out) > 6 else None
        spin = sum(m - 1 for m in mults)
        xyz = optimise(syms, xyz0, charge=sum(charges), spin=spin, constraints=cons)
        how = ("%s optimised" % LEVEL) + (" (Li-O frozen)" if cons else "")
    write_xyz(os.path.join(HERE, name + ".xyz"), syms, xyz,
              COMMENT % (name.replace("_", "-"), how))
    d = np.linalg.norm(xyz[contact[0]] - xyz[contact[1]])
    log("%s: %d atoms, contact %s = %.3f A, %.0f s"
        % (name, len(syms), contact, d, time.time() - t0))
    meta = dict(n_a=n_a, charges=charges, mults=mults, contact=contact)
    if META[name] is not None and META[name] != meta:
        raise RuntimeError("META out of sync with builder for %s" % name)
    return meta


# metadata that does not need a calculation (kept in sync with the builders)
META = {
    "water_methanol": dict(n_a=3, charges=[0, 0], mults=[1, 1], contact=(1, 3)),
    "formaldehyde_water": dict(n_a=4, charges=[0, 0], mults=[1, 1], contact=(0, 5)),
    "methane_ethene": dict(n_a=6, charges=[0, 0], mults=[1, 1], contact=(0, 7)),
    "nma_water": dict(n_a=12, charges=[0, 0], mults=[1, 1], contact=(0, 13)),
    "benzene_pyridine": None,   # contact found from the final geometry
    "lithium_water": dict(n_a=1, charges=[1, 0], mults=[1, 1], contact=(0, 1)),
    "chloride_water": dict(n_a=1, charges=[-1, 0], mults=[1, 1], contact=(0, 2)),
    "hydroxyl_water": dict(n_a=2, charges=[0, 0], mults=[2, 1], contact=(1, 2)),
}


def read_xyz(path):
    """Return symbols and coordinates of an XYZ file."""
    with open(path) as fh:
        lines = fh.read().splitlines()
    n = int(lines[0])
    rows = [ln.split() for ln in lines[2:2 + n]]
    return [r[0] for r in rows], np.array([[float(v) for v in r[1:4]] for r in rows])


def write_catalog():
    """Regenerate catalog.toml from the XYZ files present."""
    out = []
    for name, (_, title, character, description) in SYSTEMS.items():
        path = os.path.join(HERE, name + ".xyz")
        if not os.path.exists(path):
            continue
        syms, xyz = read_xyz(path)
        meta = META[name]
        if meta is None:      # benzene-pyridine: 12 + 11, closest A/B pair
            dm = np.linalg.norm(xyz[:12, None] - xyz[None, 12:], axis=2)
            ia, ib = np.unravel_index(np.argmin(dm), dm.shape)
            meta = dict(n_a=12, charges=[0, 0], mults=[1, 1],
                        contact=(int(ia), int(ib) + 12))
        out.append("[%s]" % name)
        out.append('file = "%s.xyz"' % name)
        out.append('title = "%s"' % title)
        out.append('character = "%s"' % character)
        out.append("fragment_a = [%s]" % ", ".join(str(i) for i in range(meta["n_a"])))
        out.append("charges = [%d, %d]" % tuple(meta["charges"]))
        out.append("multiplicities = [%d, %d]" % tuple(meta["mults"]))
        out.append("contact = [%d, %d]" % tuple(meta["contact"]))
        out.append('description = "%s"' % description)
        out.append("")
    with open(os.path.join(HERE, "catalog.toml"), "w") as fh:
        fh.write("# interkit demo dimers (generated by build_geometries.py)\n\n")
        fh.write("\n".join(out))


def main(argv):
    """Build the requested systems (all by default) and rewrite the catalog."""
    lib.num_threads(1)
    if argv == ["--lithium-free"]:
        print("free Li...O optimum: %.3f A" % lithium_water_free_optimum())
        return
    names = argv or list(SYSTEMS)
    for name in names:
        if name not in SYSTEMS:
            raise SystemExit("unknown system %r; choose from %s" % (name, ", ".join(SYSTEMS)))
    t0 = time.time()
    for name in names:
        build(name, log=lambda msg: print(msg, flush=True))
    write_catalog()
    print("total %.0f s" % (time.time() - t0), flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
