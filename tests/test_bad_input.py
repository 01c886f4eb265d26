"""Bad input: every case is one clear error naming the field and value, exit status 2
from the command line, no traceback, and nothing written.

The table below runs every row in-process through ``interkit.cli.main`` (cheap: bad
input must be refused before any calculation); two rows at the end run the real
``interkit`` process to prove that no traceback reaches the terminal. Source of every
expectation: the product rule "bad input gets one line naming the field and the value,
exit code 2, nothing written" (issue 11).
"""

from __future__ import annotations

import shlex
import subprocess
import sys

import numpy as np
import pytest

import interkit as ik
from interkit.cli.main import main

WATER_HF = """4
hydrogen fluoride dimer
F   0.000000  0.000000  0.000000
H   0.000000  0.000000  0.920000
F   0.000000  0.000000  2.750000
H   0.850000  0.000000  3.050000
"""
#: the same atoms with fragment B's atoms listed in the other order (H before F)
SWAPPED_B = WATER_HF.replace("F   0.000000  0.000000  2.750000\nH   0.850000  0.000000  3.050000",
                             "H   0.850000  0.000000  3.050000\nF   0.000000  0.000000  2.750000")

GOOD_SPEC = {
    "system": 'geometry = "g.xyz"',
    "scan": 'coordinate = "atom-pair"\natoms = [1, 2]\nfactors = [1.0, 1.2]',
    "calculation": 'levels = ["hf/sto-3g"]',
}
PAIR = 'coordinate = "atom-pair"\natoms = [1, 2]\n'
FRAMES = 'coordinate = "frames"\nframes = "f.xyz"\n'
DIR = object()   # a file entry that is a folder


def _spec_text(**override) -> str:
    tables = dict(GOOD_SPEC, **{k: v for k, v in override.items() if k in GOOD_SPEC})
    extra = override.get("extra", "")
    return extra + "\n" + "\n".join(f"[{k}]\n{v}" for k, v in tables.items() if v is not None)


SCAN = "scan {i}/spec.toml -o {t}/out.nc --cache {t}/store --quiet --serial"


def spec(case, expected, xyz=WATER_HF, files=None, argv=SCAN, **override):
    """A row that runs ``interkit scan`` on a spec built from GOOD_SPEC and ``override``
    (``system=``, ``scan=``, ``calculation=``, ``extra=`` top-level lines)."""
    entries = {"spec.toml": _spec_text(**override)}
    if xyz is not None:
        entries["g.xyz"] = xyz
    entries.update(files or {})
    return (case, argv, expected, entries)


def cmd(case, argv, expected, files=None):
    """A row that runs any command; ``{i}`` holds ``files``, ``{t}`` is an empty output
    folder, ``{d}`` the folder of saved scans, ``{s}`` a good spec file."""
    entries = {"spec.toml": _spec_text(), "g.xyz": WATER_HF}
    entries.update(files or {})
    return (case, argv.replace("{s}", "{i}/spec.toml"), expected, entries)


ROWS = [
    # ------------------------------------------------------------------ geometry files
    spec("missing geometry file", "geometry file: '{i}/nope.xyz' does not exist", system='geometry = "nope.xyz"'),
    spec("atom count not a number", "expected an atom count", xyz="four\nx\nF 0 0 0\n"),
    spec("geometry not UTF-8", "geometry file: '{i}/g.xyz' is not a UTF-8 text file", xyz=b"\xff\xfe\x00F 0 0 0\n"),
    spec("geometry with NUL bytes", "it contains NUL bytes", xyz=b"4\n\x00\x00\x00\nF 0 0 0\n"),
    spec("geometry long garbage line is quoted short", "expected an atom count, found 'xxxxxxxx",
         xyz="x" * 5000 + "\n"),
    spec("geometry is a folder", "geometry file: '{i}/g.xyz' does not exist", xyz=None, files={"g.xyz": DIR}),
    spec("geometry name not a string", "system.geometry: 5 is not", system="geometry = 5"),
    # ------------------------------------------------------------------ elements, coordinates
    spec("unknown element", "unknown element 'Xq'", xyz=WATER_HF.replace("F   0.000000  0.000000  0.000000", "Xq 0 0 0")),
    spec("dummy element", "unknown element 'X'", xyz=WATER_HF.replace("F   0.000000  0.000000  0.000000", "X 0 0 0")),
    spec("non-numeric coordinate", "are not numbers", xyz=WATER_HF.replace("0.920000", "0.92abc")),
    spec("NaN coordinate", "not finite", xyz=WATER_HF.replace("0.920000", "nan")),
    spec("infinite coordinate", "not finite", xyz=WATER_HF.replace("0.920000", "inf")),
    spec("missing coordinate", "expected 'element x y z'", xyz=WATER_HF.replace("0.000000  0.920000", "")),
    spec("atom count beyond the file", "announces 5 atoms", xyz=WATER_HF.replace("4\n", "5\n", 1)),
    # ------------------------------------------------------------------ fragments
    spec("atoms too close", "closer than 0.5", xyz=WATER_HF.replace("0.920000", "0.300000")),
    spec("three fragments", "found 3 fragments", xyz=WATER_HF.replace("4\n", "5\n", 1) + "Ne 5.0 5.0 5.0\n"),
    spec("one fragment", "found 1 fragments",
         xyz=WATER_HF.replace("2.750000", "1.800000").replace("3.050000", "2.100000")),
    spec("fragment index out of range", "fragment_a: atom index 9", system='geometry = "g.xyz"\nfragment_a = [0, 9]'),
    spec("fragment_a with floats", "fragment_a: 0.5 is not an atom index", system='geometry = "g.xyz"\nfragment_a = [0.5, 1.5]'),
    spec("fragment_a a string", "fragment_a: '01' is not a list", system='geometry = "g.xyz"\nfragment_a = "01"'),
    spec("fragment_a a number", "fragment_a: 5 is not a list", system='geometry = "g.xyz"\nfragment_a = 5'),
    spec("fragment_a repeats", "repeats an atom index", system='geometry = "g.xyz"\nfragment_a = [0, 0]'),
    spec("fragment_a all atoms", "fragment B is empty", system='geometry = "g.xyz"\nfragment_a = [0, 1, 2, 3]'),
    # ------------------------------------------------------------------ charges, spins
    spec("charge not an integer", "charges: 0.5 is not an integer", system='geometry = "g.xyz"\ncharges = [0.5, 0]'),
    spec("charges a string", "charges: '0' is not an integer", system='geometry = "g.xyz"\ncharges = "00"'),
    spec("one charge", "charges: expected two values", system='geometry = "g.xyz"\ncharges = [0]'),
    spec("charge removes every electron", "leaves fragment A with no electrons",
         system='geometry = "g.xyz"\ncharges = [10, 0]'),
    spec("multiplicity impossible", "multiplicities[0]: multiplicity 2 is impossible",
         system='geometry = "g.xyz"\nmultiplicities = [2, 1]'),
    spec("multiplicity zero", "multiplicities[0]: 0 is not a positive integer",
         system='geometry = "g.xyz"\nmultiplicities = [0, 1]'),
    spec("multiplicity a float", "multiplicities: 1.5 is not an integer",
         system='geometry = "g.xyz"\nmultiplicities = [1.5, 1]'),
    # ------------------------------------------------------------------ grids and coordinates
    spec("negative factor", "factors[1]: -1.2", scan=PAIR + "factors = [1.0, -1.2]"),
    spec("grid point too close", "factors[0] = 0.2", scan=PAIR + "factors = [0.2, 1.0]"),
    spec("both grids", "give exactly one of distances", scan=PAIR + "factors = [1.0]\ndistances = [2.0]"),
    spec("empty grid", "distances: the grid is empty", scan=PAIR + "distances = []"),
    spec("grid value a string", "factors[0]: 'far' is not a number", scan=PAIR + 'factors = ["far"]'),
    spec("grid value twice", "factors: value 1.0 appears twice", scan=PAIR + "factors = [1.0, 1.0]"),
    spec("grid value infinite", "distances[0]: inf is not a positive finite", scan=PAIR + "distances = [inf]"),
    spec("atoms in one fragment", "both in fragment A", scan='coordinate = "atom-pair"\natoms = [0, 1]\nfactors = [1.0]'),
    spec("atom pair of three", "scan.atoms: [1, 2, 3] is not a pair", scan='coordinate = "atom-pair"\natoms = [1, 2, 3]\nfactors = [1.0]'),
    spec("unknown coordinate", "'spiral'", scan='coordinate = "spiral"\nfactors = [1.0]'),
    spec("vector a number", "scan.vector: 5 is not a list of three numbers", scan='coordinate = "vector"\nvector = 5\nfactors = [1.0]'),
    spec("vector of two", "coordinate vector: (1, 0) is not three numbers", scan='coordinate = "vector"\nvector = [1, 0]\nfactors = [1.0]'),
    spec("vector zero", "is not a finite non-zero vector", scan='coordinate = "vector"\nvector = [0, 0, 0]\nfactors = [1.0]'),
    spec("frames atoms a number", "scan.atoms: 5 is not a pair of atom indices", scan=FRAMES + "atoms = 5",
         files={"f.xyz": WATER_HF}),
    spec("frames values not numbers", "coordinate values[0]: 'a' is not a finite number", scan=FRAMES + 'values = ["a"]',
         files={"f.xyz": WATER_HF}),
    spec("frames values NaN", "coordinate values[0]: nan is not a finite number", scan=FRAMES + "values = [nan]",
         files={"f.xyz": WATER_HF}),
    spec("frames atoms in another order", "frames[1]: atom 2 is H, but atom 2 of the dimer is F",
         scan=FRAMES, files={"f.xyz": WATER_HF + SWAPPED_B}),
    spec("frames with a grid", "a Frames coordinate gives its own geometries", scan=FRAMES + "factors = [1.0]",
         files={"f.xyz": WATER_HF}),
    spec("frames file missing", "'{i}/none.xyz' does not exist", scan='coordinate = "frames"\nframes = "none.xyz"'),
    # ------------------------------------------------------------------ levels
    spec("unknown functional", "'b3lypp' is unknown", calculation='levels = ["b3lypp/def2-svp"]'),
    spec("unknown basis", "'def2-nonsense' is unknown", calculation='levels = ["hf/def2-nonsense"]'),
    spec("level without basis", "'hf' is not of the form", calculation='levels = ["hf"]'),
    spec("level not a string", "calculation.levels[0]: 5 is not a 'method/basis' string", calculation="levels = [5]"),
    spec("no level", "levels: no level of theory given", calculation="levels = []"),
    spec("level twice", "levels: 'hf/sto-3g' appears twice", calculation='levels = ["hf/sto-3g", "hf/sto-3g"]'),
    spec("dispersion on HF", "applies to DFT levels only", calculation='levels = ["hf-d3bj/def2-svp"]'),
    spec("levels not a list", "calculation.levels", calculation='levels = "hf/sto-3g"'),
    spec("nonlocal functional with a post-hoc correction", "own nonlocal (VV10)",
         calculation='levels = ["wb97m-v-d3bj/sto-3g"]'),
    # ------------------------------------------------------------------ spec keys and types
    spec("spec not UTF-8", "spec file '{i}/spec.toml': not a UTF-8 text file", xyz=WATER_HF, files={"spec.toml": b"[system]\ngeometry = \"\xff\xfe\"\n"}),
    spec("spec binary", "spec file '{i}/spec.toml': not a UTF-8", files={"spec.toml": bytes(range(256)) * 4}),
    spec("unknown spec key", "'calculation.basis_set' is not recognised",
         calculation='levels = ["hf/sto-3g"]\nbasis_set = "x"'),
    spec("unknown top-level key", "spec key 'title' is not recognised", extra='title = "x"'),
    spec("missing table", "table [scan] is missing", scan=None),
    spec("table not a table", "spec: 'system' must be a table", system=None, extra="system = 5"),
    spec("name not a string", "name: 5 is not a string", extra="name = 5"),
    spec("name a list", "name: ['a'] is not a string", extra='name = ["a"]'),
    spec("geometry and demo", "give exactly one of system.geometry", system='geometry = "g.xyz"\ndemo = "x"'),
    spec("unknown demo", "system.demo: 'nowhere' is not a demo system", system='demo = "nowhere"'),
    spec("counterpoise not a boolean", "counterpoise: 'yes' is not true or false",
         calculation='levels = ["hf/sto-3g"]\ncounterpoise = "yes"'),
    spec("scf_threshold_hartree too loose", "scf_threshold_hartree: 0.1 must lie in", calculation='levels = ["hf/sto-3g"]\nscf_threshold_hartree = 0.1'),
    spec("scf_threshold_hartree a word", "scf_threshold_hartree: 'tight' is not a number", calculation='levels = ["hf/sto-3g"]\nscf_threshold_hartree = "tight"'),
    spec("invalid TOML", "not valid TOML", files={"spec.toml": "[system\ngeometry = "}),
    spec("forces without counterpoise", "set counterpoise = true",
         calculation='levels = ["hf/sto-3g"]\nforces = true\ncounterpoise = false'),
    spec("unknown decomposition", "decomposition: 'sapt2+' is not one of",
         calculation='levels = ["hf/sto-3g"]\ndecomposition = "sapt2+"'),
    spec("decomposition of an open-shell fragment", "fragment B has multiplicity 3",
         system='geometry = "g.xyz"\nmultiplicities = [1, 3]',
         calculation='levels = ["hf/sto-3g"]\ndecomposition = "sapt0"'),
    spec("decomposition above the memory limit", "above the limit of 0.01 MB",
         calculation='levels = ["hf/sto-3g"]\ndecomposition = "sapt0"\nsapt_memory_limit_mb = 0.01'),
    spec("unknown decomposition basis", "decomposition_basis: 'jun-nonsense'",
         calculation='levels = ["hf/sto-3g"]\ndecomposition = "sapt0"\ndecomposition_basis = "jun-nonsense"'),
    spec("dispersion schemes without a DFT level", "apply to DFT levels only",
         calculation='levels = ["hf/sto-3g"]\ndispersion = ["d3bj"]'),
    spec("unknown dispersion scheme", "dispersion: 'd5' is not one of",
         calculation='levels = ["b3lyp/sto-3g"]\ndispersion = ["none", "d5"]'),
    spec("dispersion scheme twice", "dispersion: 'd4' appears twice",
         calculation='levels = ["b3lyp/sto-3g"]\ndispersion = ["d4", "d4"]'),
    spec("suffix level in a dispersion comparison", "carries its own dispersion suffix",
         calculation='levels = ["b3lyp-d3bj/sto-3g"]\ndispersion = ["none", "d4"]'),
    cmd("spec file missing", "scan {i}/none.toml -o {t}/o.nc", "spec file: '{i}/none.toml' does not exist"),
    # ------------------------------------------------------------------ output paths
    cmd("scan output a folder", "scan {s} -o {i}/out.nc --quiet --serial", "--output: '{i}/out.nc' is a folder, not a file (netCDF)", files={"out.nc": DIR}),
    cmd("scan output not .nc", "scan {s} -o {t}/out.txt", "--output: '{t}/out.txt' should end in .nc"),
    cmd("scan output folder missing", "scan {s} -o {t}/no/out.nc", "--output: folder '{t}/no' does not exist"),
    cmd("workers zero", "scan {s} -o {t}/o.nc --workers 0", "--workers: 0 is not a positive integer"),
    cmd("demo output a file", "demo -o {i}/spec.toml --serial", "--output-dir: '{i}/spec.toml' is a file, not a folder"),
    cmd("rerun output not .nc", "rerun {d}/scan.nc -o {t}/again.txt --serial", "should end in .nc"),
    cmd("rerun output a folder", "rerun {d}/scan.nc -o {i}/again.nc --serial", "--output: '{i}/again.nc' is a folder", files={"again.nc": DIR}),
    cmd("report output not html", "report {d}/scan.nc -o {t}/report.pdf", "should end in .html"),
    cmd("report output a folder", "report {d}/scan.nc -o {i}/r.html", "--output: '{i}/r.html' is a folder, not a file (HTML)", files={"r.html": DIR}),
    cmd("report folder missing", "report {d}/scan.nc -o {t}/nowhere/report.html", "does not exist"),
    cmd("export unknown suffix", "export {d}/scan.nc -o {t}/scan.txt", "should end in .csv, .json, .xyz or .extxyz"),
    cmd("export output a folder", "export {d}/scan.nc -o {i}/x.json", "--output: '{i}/x.json' is a folder", files={"x.json": DIR}),
    cmd("compare table not csv", "compare {d}/scan.nc --table {t}/rank.txt", "--table: '{t}/rank.txt' should end in .csv"),
    cmd("compare table a folder", "compare {d}/scan.nc --table {i}/rank.csv", "--table: '{i}/rank.csv' is a folder", files={"rank.csv": DIR}),
    # ------------------------------------------------------------------ saved .nc files
    cmd("verify sample 0", "verify {d}/scan.nc --sample 0", "sample: 0 is not a positive number of points"),
    cmd("verify sample not a number", "verify {d}/scan.nc --sample many", "invalid int value: 'many'"),
    cmd("verify missing file", "verify {t}/none.nc", "scan file: '{t}/none.nc' does not exist"),
    cmd("verify not netCDF", "verify {d}/notes.nc", "not a readable netCDF scan"),
    cmd("show binary file", "show {i}/junk.nc", "not a readable netCDF scan", files={"junk.nc": bytes(range(256))}),
    cmd("show energies as strings", "show {d}/strings.nc", "dataset variable e_int: values of type"),
    cmd("show a folder", "show {i}/dir.nc", "scan file: '{i}/dir.nc' does not exist", files={"dir.nc": DIR}),
    cmd("rerun spec not rebuildable", "rerun {d}/nospec.nc --serial --quiet", "cannot be rebuilt"),
    cmd("report unknown reference", "report {d}/scan.nc -o {t}/report.html --reference mp2/x",
        "--reference: 'mp2/x' is not a curve of the scan"),
    cmd("export unknown format", "export {d}/scan.nc -o {t}/scan.csv --format xml", "invalid choice: 'xml'"),
    cmd("export unknown unit", "export {d}/scan.nc -o {t}/scan.csv --unit furlongs", "unit: 'furlongs'"),
    # ------------------------------------------------------------------ reference files
    cmd("reference CSV binary", "compare {d}/scan.nc --reference-file {i}/ref.csv", "reference file '{i}/ref.csv': not a UTF-8 text (CSV) file",
        files={"ref.csv": bytes(range(256)) * 4}),
    cmd("reference CSV without columns", "compare {d}/scan.nc --reference-file {i}/ref.csv",
        "header lacks column 'distance_angstrom'", files={"ref.csv": "r,e\n1,2\n"}),
    cmd("reference CSV long header is quoted short", "compare {d}/scan.nc --reference-file {i}/ref.csv",
        "header lacks column", files={"ref.csv": "y" * 3000 + "\n"}),
    cmd("reference CSV non-numeric", "compare {d}/scan.nc --reference-file {i}/ref.csv",
        "ref.csv line 2: column 'e_int_kcal_per_mol' value 'deep' is not a number",
        files={"ref.csv": "distance_angstrom,e_int_kcal_per_mol\n2.0,deep\n3.0,-1\n"}),
    cmd("reference scan with string energies", "compare {d}/scan.nc --reference-file {d}/strings.nc",
        "dataset variable e_int: values of type"),
    cmd("reference curve without file", "compare {d}/scan.nc --reference-curve hf/sto-3g",
        "--reference-curve: give --reference-file as well"),
    cmd("compare unknown reference", "compare {d}/scan.nc --reference mp2/x", "--reference: 'mp2/x' is not a curve"),
    # ------------------------------------------------------------------ scheduler and store
    cmd("scheduler address malformed", "scan {s} -o {t}/o.nc --scheduler nonsense",
        "--scheduler: 'nonsense' is not a scheduler address"),
    cmd("scheduler unknown scheme", "scan {s} -o {t}/o.nc --scheduler foo://host:1", "unknown address scheme 'foo'"),
    cmd("scheduler not answering", "scan {s} -o {t}/o.nc --scheduler tcp://127.0.0.1:9",
        "--scheduler: cannot connect to 'tcp://127.0.0.1:9'"),
    cmd("scheduler with serial", "scan {s} -o {t}/o.nc --scheduler tcp://127.0.0.1:9 --serial",
        "leave out --serial and --workers"),
    cmd("store info of a plain folder", "store info {t}", "is not a result store"),
    cmd("store prune bad size", "store prune {t} --max-size 10XB", "--max-size: '10XB' is not a size"),
    cmd("store prune negative size", "store prune {t} --max-size=-1GB", "--max-size: '-1GB' is not a size"),
    cmd("store prune without limit", "store prune {t}", "the following arguments are required: --max-size"),
    # ------------------------------------------------------------------ later options and commands
    spec("keep_densities not a flag", "keep_densities", calculation='levels = ["hf/sto-3g"]\nkeep_densities = "yes"'),
    spec("default fitting basis lacks an element", "jk_auxbasis: pyscf's fitting basis for cc-pvdz, 'cc-pvdz-jkfit', "
         "has no functions for He", xyz="2\nhelium dimer\nHe 0 0 0\nHe 0 0 3.0\n",
         system='geometry = "g.xyz"\nfragment_a = [0]', scan='coordinate = "atom-pair"\natoms = [0, 1]\nfactors = [1.0]',
         calculation='levels = ["hf/cc-pvdz"]'),
    cmd("show unknown energy unit", "show {d}/scan.nc --unit furlongs", "--unit: invalid choice: 'furlongs'"),
    cmd("show unknown force unit", "show {d}/scan.nc --force-unit N", "--force-unit: invalid choice: 'N'"),
    cmd("cube point outside the scan", "cube {d}/scan.nc --point 99 -o {t}/c", "point: 99 is not a point of the scan"),
    cmd("cube point not a number", "cube {d}/scan.nc --point x -o {t}/c", "--point: invalid int value: 'x'"),
    cmd("cube spacing zero", "cube {d}/scan.nc --point 0 -o {t}/c --spacing 0", "--spacing: 0.0 bohr is outside"),
    cmd("cube level not in the scan", "cube {d}/scan.nc --point 0 -o {t}/c --level mp2/x",
        "level: 'mp2/x' is not in the scan"),
    cmd("cube missing scan file", "cube {t}/none.nc --point 0 -o {t}/c", "scan file: '{t}/none.nc' does not exist"),
    cmd("spec missing scan file", "spec {t}/none.nc", "scan file: '{t}/none.nc' does not exist"),
    cmd("spec output not TOML", "spec {d}/scan.nc -o {t}/x.txt", "--output: '{t}/x.txt' should end in .toml"),
    cmd("study file missing", "study run {t}/nope.toml -o {t}/s.nc", "study file: '{t}/nope.toml' does not exist"),
    cmd("study rank of a scan file", "study rank {d}/scan.nc", "schema 'interkit-scan/2' is not 'interkit-study/1'"),
    cmd("orientation file missing", "orient {t}/nope.toml -o {t}/o.nc", "orientation file: '{t}/nope.toml' does not exist"),
    cmd("unknown command", "frobnicate", "invalid choice: 'frobnicate'"),
]

#: longest error line accepted: one line, with at most a short excerpt of a bad file
MAX_MESSAGE_CHARS = 400


@pytest.fixture(scope="module")
def saved_scans(tmp_path_factory):
    """A one-point HF/STO-3G scan file, one whose spec cannot be rebuilt, one whose
    energies are strings, and a text file named .nc."""
    folder = tmp_path_factory.mktemp("saved")
    dimer = ik.Dimer.from_xyz_string(WATER_HF, name="hf-dimer")
    scan = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"])
    ds = ik.run_scan(scan, executor="serial", progress=False)
    ik.save_scan(ds, folder / "scan.nc")
    bad = ds.copy()
    bad.attrs["spec_json"] = '{"name": "no dimer here"}'
    ik.save_scan(bad, folder / "nospec.nc")
    strings = ds.copy()
    strings["e_int"] = strings["e_int"].astype(str)     # bypasses save_scan's validation
    strings.to_netcdf(folder / "strings.nc", engine="h5netcdf")
    (folder / "notes.nc").write_text("not a netCDF file")
    return folder


def _snapshot(folder):
    return sorted((p.name, p.is_dir(), p.stat().st_size, p.stat().st_mtime_ns) for p in folder.rglob("*"))


@pytest.mark.parametrize("case,argv,expected,files", ROWS, ids=[r[0] for r in ROWS])
def test_bad_input_is_one_line_exit_2_and_writes_nothing(saved_scans, tmp_path, capsys, monkeypatch,
                                                         case, argv, expected, files):
    import interkit.run.dask

    monkeypatch.setattr(interkit.run.dask, "CONNECT_TIMEOUT_S", 1.0)  # nothing listens on port 9
    inp, out = tmp_path / "in", tmp_path / "out"
    inp.mkdir()
    out.mkdir()
    for name, content in files.items():
        path = inp / name
        if content is DIR:
            path.mkdir()
        elif isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content)
    before, saved_before = _snapshot(inp), _snapshot(saved_scans)
    monkeypatch.chdir(out)
    args = [a.format(i=inp, t=out, d=saved_scans) for a in shlex.split(argv)]
    try:
        code = main(args)
    except SystemExit as exc:      # argparse usage errors
        code = exc.code
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert err.startswith("interkit: error: ") and "\n" not in err, err
    expected = expected.format(i=inp, t=out, d=saved_scans)
    assert expected in err, err
    assert len(err) <= MAX_MESSAGE_CHARS, f"message of {len(err)} characters"
    assert _snapshot(inp) == before and _snapshot(saved_scans) == saved_before, "an input was changed"
    assert list(out.iterdir()) == [], "something was written"


def test_the_table_covers_every_kind_of_input():
    """At least 60 rows (issue 11), and rows for each kind of input named there."""
    assert len(ROWS) >= 60
    ids = " ".join(r[0] for r in ROWS)
    for word in ("geometry", "element", "fragment", "charge", "multiplicity", "grid", "level", "spec",
                 "output", "netCDF", "reference", "scheduler", "store"):
        assert word in ids, word


def test_api_errors_are_typed(small_dimer):
    with pytest.raises(ik.InputError, match="levels: no level"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=[])
    with pytest.raises(ik.InputError, match="decomposition: 'sapt9' is not one of"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"],
                    decomposition="sapt9")
    with pytest.raises(ik.ResourceError, match="sapt_memory_limit_mb"):
        ik.check_feasibility(ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0],
                                         levels=["hf/sto-3g"], decomposition="sapt0", sapt_memory_limit_mb=0.001))
    with pytest.raises(ik.InputError, match="name: 5 is not a string"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"], name=5)
    with pytest.raises(ik.InputError, match="fragment_a: 0.5 is not an atom index"):
        ik.Dimer.from_xyz_string(WATER_HF, fragment_a=[0.5, 1.5])
    with pytest.raises(ik.InputError, match="coordinate values\\[1\\]: nan"):
        ik.Frames([small_dimer.coordinates, small_dimer.coordinates], values=[1.0, float("nan")])
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"])
    with pytest.raises(ik.InputError, match="executor: object is not 'processes', 'serial' or a dask"):
        ik.run_scan(spec, executor=object(), progress=False)
    with pytest.raises(ik.InputError, match="executor: 'threads'"):
        ik.run_scan(spec, executor="threads", progress=False)
    with pytest.raises(ik.InputError, match="workers: 0"):
        ik.run_scan(spec, workers=0, progress=False)
    with pytest.raises(ik.InputError, match="scan file"):
        ik.open_scan("/nonexistent/scan.nc")


def test_validate_refuses_energies_that_are_not_numbers(saved_scans):
    """An .nc whose energies are strings is refused by validate (not read as NaN later)."""
    ds = ik.open_scan(saved_scans / "scan.nc")
    ds["bsse"] = ds["bsse"].astype(str)
    with pytest.raises(ik.InputError, match="dataset variable bsse: values of type"):
        ik.validate(ds) if hasattr(ik, "validate") else __import__("interkit.data.schema").results.validate(ds)
    ds = ik.open_scan(saved_scans / "scan.nc")
    ds["e_int"] = ds["e_int"].astype(np.complex128)
    from interkit.data.schema import validate

    with pytest.raises(ik.InputError, match="dataset variable e_int"):
        validate(ds)


# ---------------------------------------------------------------------- real processes
def test_cli_usage_error_has_no_traceback(tmp_path):
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "scan", str(tmp_path / "missing.toml"),
                          "-o", str(tmp_path / "x.nc")], capture_output=True, text=True)
    assert out.returncode == 2
    assert "Traceback" not in out.stderr
    assert out.stderr.strip() == f"interkit: error: spec file: {str(tmp_path / 'missing.toml')!r} does not exist"
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "frobnicate"], capture_output=True, text=True)
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert out.stderr.count("\n") == 1


def test_cli_bad_frames_spec_has_no_traceback(tmp_path):
    """A frames spec with ``atoms = 5`` crashed with a TypeError traceback before."""
    (tmp_path / "g.xyz").write_text(WATER_HF)
    (tmp_path / "f.xyz").write_text(WATER_HF)
    (tmp_path / "spec.toml").write_text(_spec_text(scan=FRAMES + "atoms = 5"))
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "scan", str(tmp_path / "spec.toml"),
                          "-o", str(tmp_path / "x.nc")], capture_output=True, text=True)
    assert out.returncode == 2, out.stderr
    assert "Traceback" not in out.stderr and out.stderr.count("\n") == 1, out.stderr
    assert "scan.atoms: 5" in out.stderr
