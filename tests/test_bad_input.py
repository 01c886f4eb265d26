"""Bad input: every case is one clear error naming the field and value, exit status 2
from the command line, no traceback, and nothing written."""

from __future__ import annotations

import subprocess
import sys
import textwrap

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

GOOD_SPEC = {
    "system": 'geometry = "g.xyz"',
    "scan": 'coordinate = "atom-pair"\natoms = [1, 2]\nfactors = [1.0, 1.2]',
    "calculation": 'levels = ["hf/sto-3g"]',
}


def _spec_text(**override) -> str:
    tables = dict(GOOD_SPEC, **{k: v for k, v in override.items() if k in GOOD_SPEC})
    extra = override.get("extra", "")
    return extra + "\n" + "\n".join(f"[{k}]\n{v}" for k, v in tables.items() if v is not None)


# (case id, xyz text, spec override, expected message fragment)
CASES = [
    ("missing geometry file", None, {"system": 'geometry = "nope.xyz"'}, "does not exist"),
    ("atom count not a number", "four\nx\nF 0 0 0\n", {}, "expected an atom count"),
    ("unknown element", WATER_HF.replace("F   0.000000  0.000000  0.000000", "Xq 0 0 0"), {}, "unknown element 'Xq'"),
    ("non-numeric coordinate", WATER_HF.replace("0.920000", "0.92abc"), {}, "are not numbers"),
    ("NaN coordinate", WATER_HF.replace("0.920000", "nan"), {}, "not finite"),
    ("atoms too close", WATER_HF.replace("0.920000", "0.300000"), {}, "closer than 0.5"),
    ("three fragments", WATER_HF.replace("4\n", "5\n", 1) + "Ne 5.0 5.0 5.0\n", {}, "found 3 fragments"),
    ("one fragment", WATER_HF.replace("2.750000", "1.800000").replace("3.050000", "2.100000"), {},
     "found 1 fragments"),
    ("multiplicity impossible", WATER_HF, {"system": 'geometry = "g.xyz"\nmultiplicities = [2, 1]'},
     "multiplicities[0]: multiplicity 2 is impossible"),
    ("charge not an integer", WATER_HF, {"system": 'geometry = "g.xyz"\ncharges = [0.5, 0]'},
     "charges: 0.5 is not an integer"),
    ("fragment index out of range", WATER_HF, {"system": 'geometry = "g.xyz"\nfragment_a = [0, 9]'},
     "fragment_a: atom index 9"),
    ("negative factor", WATER_HF, {"scan": 'coordinate = "atom-pair"\natoms = [1, 2]\nfactors = [1.0, -1.2]'},
     "factors[1]: -1.2"),
    ("grid point too close", WATER_HF, {"scan": 'coordinate = "atom-pair"\natoms = [1, 2]\nfactors = [0.2, 1.0]'},
     "factors[0] = 0.2"),
    ("both grids", WATER_HF, {"scan": 'coordinate = "atom-pair"\natoms = [1, 2]\nfactors = [1.0]\ndistances = [2.0]'},
     "give exactly one of distances"),
    ("atoms in one fragment", WATER_HF, {"scan": 'coordinate = "atom-pair"\natoms = [0, 1]\nfactors = [1.0]'},
     "both in fragment A"),
    ("unknown coordinate", WATER_HF, {"scan": 'coordinate = "spiral"\nfactors = [1.0]'}, "'spiral'"),
    ("unknown functional", WATER_HF, {"calculation": 'levels = ["b3lypp/def2-svp"]'}, "'b3lypp' is unknown"),
    ("unknown basis", WATER_HF, {"calculation": 'levels = ["hf/def2-nonsense"]'}, "'def2-nonsense' is unknown"),
    ("level without basis", WATER_HF, {"calculation": 'levels = ["hf"]'}, "'hf' is not of the form"),
    ("dispersion on HF", WATER_HF, {"calculation": 'levels = ["hf-d3bj/def2-svp"]'}, "applies to DFT levels only"),
    ("levels not a list", WATER_HF, {"calculation": 'levels = "hf/sto-3g"'}, "calculation.levels"),
    ("unknown spec key", WATER_HF, {"calculation": 'levels = ["hf/sto-3g"]\nbasis_set = "x"'},
     "'calculation.basis_set' is not recognised"),
    ("missing table", WATER_HF, {"scan": None}, "table [scan] is missing"),
    ("forces without counterpoise", WATER_HF,
     {"calculation": 'levels = ["hf/sto-3g"]\nforces = true\ncounterpoise = false'}, "set counterpoise = true"),
    ("unknown decomposition", WATER_HF, {"calculation": 'levels = ["hf/sto-3g"]\ndecomposition = "sapt2+"'},
     "decomposition: 'sapt2+' is not one of"),
    ("decomposition of an open-shell fragment", WATER_HF,
     {"system": 'geometry = "g.xyz"\nmultiplicities = [1, 3]',
      "calculation": 'levels = ["hf/sto-3g"]\ndecomposition = "sapt0"'},
     "fragment B has multiplicity 3"),
    ("decomposition above the memory limit", WATER_HF,
     {"calculation": 'levels = ["hf/sto-3g"]\ndecomposition = "sapt0"\nsapt_memory_limit_mb = 0.01'},
     "above the limit of 0.01 MB"),
    ("unknown decomposition basis", WATER_HF,
     {"calculation": 'levels = ["hf/sto-3g"]\ndecomposition = "sapt0"\ndecomposition_basis = "jun-nonsense"'},
     "decomposition_basis: 'jun-nonsense'"),
    ("dispersion schemes without a DFT level", WATER_HF,
     {"calculation": 'levels = ["hf/sto-3g"]\ndispersion = ["d3bj"]'}, "apply to DFT levels only"),
    ("unknown dispersion scheme", WATER_HF,
     {"calculation": 'levels = ["b3lyp/sto-3g"]\ndispersion = ["none", "d5"]'}, "dispersion: 'd5' is not one of"),
    ("dispersion scheme twice", WATER_HF,
     {"calculation": 'levels = ["b3lyp/sto-3g"]\ndispersion = ["d4", "d4"]'}, "dispersion: 'd4' appears twice"),
    ("suffix level in a dispersion comparison", WATER_HF,
     {"calculation": 'levels = ["b3lyp-d3bj/sto-3g"]\ndispersion = ["none", "d4"]'},
     "carries its own dispersion suffix"),
    ("nonlocal functional with a post-hoc correction", WATER_HF,
     {"calculation": 'levels = ["wb97m-v-d3bj/sto-3g"]'}, "own nonlocal (VV10)"),
]


@pytest.mark.parametrize("case,xyz,override,expected", CASES, ids=[c[0] for c in CASES])
def test_bad_spec_is_one_clear_line_exit_2_and_writes_nothing(tmp_path, capsys, case, xyz, override, expected):
    if xyz is not None:
        (tmp_path / "g.xyz").write_text(xyz)
    spec = tmp_path / "spec.toml"
    spec.write_text(_spec_text(**override))
    before = set(p.name for p in tmp_path.iterdir())
    code = main(["scan", str(spec), "-o", str(tmp_path / "out.nc"), "--cache", str(tmp_path / "store"),
                 "--quiet", "--serial"])
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert err.startswith("interkit: error: ") and "\n" not in err, err
    assert expected in err, err
    assert set(p.name for p in tmp_path.iterdir()) == before, "something was written"


def test_invalid_toml(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text("[system\ngeometry = ")
    assert main(["scan", str(spec), "-o", str(tmp_path / "o.nc")]) == 2
    assert "not valid TOML" in capsys.readouterr().err


def test_api_errors_are_typed(small_dimer):
    with pytest.raises(ik.InputError, match="levels: no level"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=[])
    with pytest.raises(ik.InputError, match="decomposition: 'sapt9' is not one of"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"],
                    decomposition="sapt9")
    with pytest.raises(ik.ResourceError, match="sapt_memory_limit_mb"):
        ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"],
                    decomposition="sapt0", sapt_memory_limit_mb=0.001)
    spec = ik.ScanSpec(dimer=small_dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"])
    with pytest.raises(ik.InputError, match="executor: object is not 'processes', 'serial' or a dask"):
        ik.run_scan(spec, executor=object(), progress=False)
    with pytest.raises(ik.InputError, match="executor: 'threads'"):
        ik.run_scan(spec, executor="threads", progress=False)
    with pytest.raises(ik.InputError, match="workers: 0"):
        ik.run_scan(spec, workers=0, progress=False)
    with pytest.raises(ik.InputError, match="scan file"):
        ik.open_scan("/nonexistent/scan.nc")


def test_cli_usage_error_has_no_traceback(tmp_path):
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "scan", str(tmp_path / "missing.toml"),
                          "-o", str(tmp_path / "x.nc")], capture_output=True, text=True)
    assert out.returncode == 2
    assert "Traceback" not in out.stderr
    assert out.stderr.strip() == f"interkit: error: spec file: {str(tmp_path / 'missing.toml')!r} does not exist"
    out = subprocess.run([sys.executable, "-m", "interkit.cli", "frobnicate"], capture_output=True, text=True)
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert textwrap.dedent(out.stderr).count("\n") == 1


# ---------------------------------------------------------------------- saved-file commands
@pytest.fixture(scope="module")
def saved_scan(tmp_path_factory):
    """A one-point HF/STO-3G scan file, and one whose spec cannot be rebuilt."""
    folder = tmp_path_factory.mktemp("saved")
    dimer = ik.Dimer.from_xyz_string(WATER_HF, name="hf-dimer")
    spec = ik.ScanSpec(dimer=dimer, coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"])
    ds = ik.run_scan(spec, executor="serial", progress=False)
    ik.save_scan(ds, folder / "scan.nc")
    ds.attrs["spec_json"] = '{"name": "no dimer here"}'
    ik.save_scan(ds, folder / "nospec.nc")
    (folder / "notes.nc").write_text("not a netCDF file")
    return folder


# (case id, arguments ({d}: folder of the saved scans, {t}: empty temporary folder), message)
SAVED_CASES = [
    ("verify sample 0", "verify {d}/scan.nc --sample 0", "sample: 0 is not a positive number of points"),
    ("verify sample not a number", "verify {d}/scan.nc --sample many", "invalid int value: 'many'"),
    ("verify missing file", "verify {t}/none.nc", "does not exist"),
    ("verify not netCDF", "verify {d}/notes.nc", "not a readable netCDF scan"),
    ("rerun spec not rebuildable", "rerun {d}/nospec.nc --serial --quiet", "cannot be rebuilt"),
    ("rerun output not .nc", "rerun {d}/scan.nc -o {t}/again.txt --serial", "should end in .nc"),
    ("report output not html", "report {d}/scan.nc -o {t}/report.pdf", "should end in .html"),
    ("report folder missing", "report {d}/scan.nc -o {t}/nowhere/report.html", "does not exist"),
    ("report unknown reference", "report {d}/scan.nc -o {t}/report.html --reference mp2/x",
     "--reference: 'mp2/x' is not a level of the scan"),
    ("export unknown suffix", "export {d}/scan.nc -o {t}/scan.txt", "should end in .csv, .json, .xyz or .extxyz"),
    ("export unknown format", "export {d}/scan.nc -o {t}/scan.csv --format xml", "invalid choice: 'xml'"),
    ("export unknown unit", "export {d}/scan.nc -o {t}/scan.csv --unit furlongs", "unit: 'furlongs'"),
]


@pytest.mark.parametrize("case,args,expected", SAVED_CASES, ids=[c[0] for c in SAVED_CASES])
def test_saved_file_commands_refuse_bad_input(saved_scan, tmp_path, capsys, case, args, expected):
    argv = args.format(d=saved_scan, t=tmp_path).split()
    try:
        code = main(argv)
    except SystemExit as exc:      # argparse usage errors
        code = exc.code
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert err.startswith("interkit: error: ") and "\n" not in err, err
    assert expected in err, err
    assert list(tmp_path.iterdir()) == [], "something was written"


# (case id, arguments ({s}: a spec file, {t}: empty temporary folder), message)
RUN_AND_STORE_CASES = [
    ("scheduler address malformed", "scan {s} -o {t}/o.nc --scheduler nonsense",
     "--scheduler: 'nonsense' is not a scheduler address"),
    ("scheduler unknown scheme", "scan {s} -o {t}/o.nc --scheduler foo://host:1", "unknown address scheme 'foo'"),
    ("scheduler not answering", "scan {s} -o {t}/o.nc --scheduler tcp://127.0.0.1:9",
     "--scheduler: cannot connect to 'tcp://127.0.0.1:9'"),
    ("scheduler with serial", "scan {s} -o {t}/o.nc --scheduler tcp://127.0.0.1:9 --serial",
     "leave out --serial and --workers"),
    ("store info of a plain folder", "store info {t}", "is not a result store"),
    ("store prune bad size", "store prune {t} --max-size 10XB", "--max-size: '10XB' is not a size"),
    ("store prune negative size", "store prune {t} --max-size=-1GB", "--max-size: '-1GB' is not a size"),
    ("store prune without limit", "store prune {t}", "the following arguments are required: --max-size"),
]


@pytest.mark.parametrize("case,args,expected", RUN_AND_STORE_CASES, ids=[c[0] for c in RUN_AND_STORE_CASES])
def test_scheduler_and_store_commands_refuse_bad_input(tmp_path, capsys, monkeypatch, case, args, expected):
    import interkit.run.dask

    monkeypatch.setattr(interkit.run.dask, "CONNECT_TIMEOUT_S", 1.0)  # nothing listens on port 9
    spec_dir = tmp_path / "spec"
    spec_dir.mkdir()
    (spec_dir / "g.xyz").write_text(WATER_HF)
    (spec_dir / "spec.toml").write_text(_spec_text())
    work = tmp_path / "work"
    work.mkdir()
    argv = args.format(s=spec_dir / "spec.toml", t=work).split()
    try:
        code = main(argv)
    except SystemExit as exc:      # argparse usage errors
        code = exc.code
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert err.startswith("interkit: error: ") and "\n" not in err, err
    assert expected in err, err
    assert list(work.iterdir()) == [], "something was written"
