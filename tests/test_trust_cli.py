"""Trust in the command line (issue 11): frames that do not match the dimer, output
paths, exit codes, scans without counterpoise, and the files interkit writes.

Every check here states its source: the product rules of issue 11 ("no silent wrong
number, no traceback, nothing lost"), or common practice for files on Unix systems.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
import sys

import numpy as np
import pytest
from conftest import HF_DIMER_XYZ, hf_dimer, require

import interkit as ik
from interkit.cli import main

#: the HF test dimer with fragment B's atoms listed H first (same molecule, other order)
SWAPPED = HF_DIMER_XYZ.replace("F   0.000000  0.000000  2.750000\nH   0.850000  0.000000  3.050000",
                               "H   0.850000  0.000000  3.050000\nF   0.000000  0.000000  2.750000")


def _spec(folder, calculation='levels = ["hf/sto-3g"]', scan='coordinate = "atom-pair"\natoms = [1, 2]\n'
          'factors = [1.0, 1.2]'):
    (folder / "g.xyz").write_text(HF_DIMER_XYZ)
    path = folder / "spec.toml"
    path.write_text(f'[system]\ngeometry = "g.xyz"\n[scan]\n{scan}\n[calculation]\n{calculation}\n')
    return path


# ---------------------------------------------------------------------- item 2: frames
def test_frames_from_dimers_must_list_the_dimers_atoms_in_order():
    """A frame with the same atoms in another order would silently put a hydrogen where
    the dimer has a fluorine: refused, naming the frame and the atom."""
    dimer = hf_dimer()
    swapped = ik.Dimer.from_xyz_string(SWAPPED, fragment_a=[0, 1])
    frames = ik.Frames([dimer, swapped])
    with pytest.raises(ik.InputError, match=r"coordinate frames\[1\]: atom 2 is H, but atom 2 of the dimer is F"):
        ik.ScanSpec(dimer=dimer, coordinate=frames, levels=["hf/sto-3g"])
    ok = ik.ScanSpec(dimer=dimer, coordinate=ik.Frames([dimer, dimer.translated_b((0, 0, 0.3))]),
                     levels=["hf/sto-3g"])
    assert len(ok.points) == 2
    again = ik.ScanSpec.from_json(ok.to_json())        # the symbols travel with the spec
    assert again.coordinate.symbols == ok.coordinate.symbols == (dimer.symbols, dimer.symbols)


def test_frames_from_an_xyz_file_are_checked_atom_by_atom(tmp_path):
    path = tmp_path / "frames.xyz"
    path.write_text(HF_DIMER_XYZ + SWAPPED)
    with pytest.raises(ik.InputError, match=r"coordinate frames\[1\]: atom 2 is H"):
        ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.Frames(path), levels=["hf/sto-3g"])
    # bare arrays carry no symbols: only the atom count can be checked
    spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.Frames([hf_dimer().coordinates]), levels=["hf/sto-3g"])
    assert spec.coordinate.symbols == (None,)


def test_frames_toml_with_another_atom_order_is_refused(tmp_path):
    (tmp_path / "f.xyz").write_text(HF_DIMER_XYZ + SWAPPED)
    spec = _spec(tmp_path, scan='coordinate = "frames"\nframes = "f.xyz"')
    with pytest.raises(ik.InputError, match=r"frames\[1\]: atom 2 is H, but atom 2 of the dimer is F"):
        ik.load_spec_toml(spec)


# ---------------------------------------------------------------------- item 11: outputs
def test_output_that_cannot_be_written_after_the_run_is_rescued(tmp_path, capsys, monkeypatch):
    """The folder becomes unwritable after the run (simulated: save_scan fails once with
    a permission error): the scan is saved under another name, and the message names it."""
    import interkit.data.schema

    spec = _spec(tmp_path)
    real_save = interkit.data.schema.save_scan
    calls = []

    def failing_once(ds, path):
        calls.append(str(path))
        if len(calls) == 1:
            raise PermissionError(13, "Permission denied", str(path))
        return real_save(ds, path)

    monkeypatch.setattr(interkit.data.schema, "save_scan", failing_once)
    out = tmp_path / "scan.nc"
    code = main(["scan", str(spec), "-o", str(out), "--serial", "--quiet", "--cache", str(tmp_path / "store")])
    err = capsys.readouterr().err.strip()
    assert code == 3, err
    assert "\n" not in err and "Permission denied" in err, err
    assert not out.exists()
    rescued = calls[1]
    assert os.path.isfile(rescued) and f"{rescued!r}" in err, err
    assert os.path.dirname(rescued) == str(tmp_path)        # next to the requested file
    ds = ik.open_scan(rescued)
    assert np.isfinite(ds["e_int"].values).all()


@pytest.mark.parametrize("argv,message", [
    ("scan {s} -o {t}", "is a folder, not a file (netCDF)"),
    ("scan {s} -o {t}/x.NC.txt", "should end in .nc"),
])
def test_scan_output_is_checked_before_the_spec_runs(tmp_path, capsys, argv, message):
    spec = _spec(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    code = main(argv.format(s=spec, t=out).split() + ["--serial", "--quiet", "--cache", str(tmp_path / "st")])
    assert code == 2 and message in capsys.readouterr().err
    assert not (tmp_path / "st").exists(), "a calculation ran"


# ---------------------------------------------------------------------- item 12: exit codes
def test_exit_code_1_names_the_failed_points(tmp_path, capsys, monkeypatch):
    """A scan that finishes with a failed point exits 1, and the summary says which."""
    import interkit.engine.energy as energy

    real = energy.run_energy_job
    first_dimer = []

    def fail_one_dimer(job, guess=None):
        if not any(job.ghost) and len(job.symbols) == 4 and not first_dimer:
            first_dimer.append(job)
            rec, _ = real(job, guess)
            rec.update(status="failed", detail="SCF did not converge (simulated)",
                       energy_hartree=float("nan"), converged=False)
            return rec, None
        return real(job, guess)

    monkeypatch.setattr(energy, "run_energy_job", fail_one_dimer)
    spec = _spec(tmp_path)
    code = main(["scan", str(spec), "-o", str(tmp_path / "s.nc"), "--serial", "--quiet", "--cache",
                 str(tmp_path / "store")])
    out = capsys.readouterr().out
    assert code == 1, out
    lines = [ln for ln in out.splitlines() if ln.startswith("failed points of hf/sto-3g")]
    assert len(lines) == 1 and "R = " in lines[0] and "simulated" in lines[0], out


def test_exit_code_3_one_line_and_the_traceback_in_a_file(tmp_path, capsys, monkeypatch):
    """An unexpected error: one line naming a traceback file created for it (mode 0600)."""
    import interkit.data.schema

    def broken(path):
        raise ZeroDivisionError("division by zero somewhere inside")

    monkeypatch.setattr(interkit.data.schema, "open_scan", broken)
    code = main(["show", str(tmp_path / "x.nc")])
    err = capsys.readouterr().err
    assert code == 3
    assert err.count("\n") == 1 and "Traceback" not in err, err
    assert err.startswith("interkit: internal error: ZeroDivisionError: division by zero"), err
    log = err.strip().rsplit("full traceback in ", 1)[1]
    text = open(log, encoding="utf-8").read()
    assert "Traceback (most recent call last)" in text and "broken" in text
    assert stat.S_IMODE(os.stat(log).st_mode) == 0o600
    assert stat.S_IMODE(os.stat(os.path.dirname(log)).st_mode) == 0o700


def test_exit_code_3_in_a_real_process_prints_no_traceback(tmp_path):
    code = ("import sys, interkit.data.schema as r\n"
            "def broken(path): raise KeyError('inside')\n"
            "r.open_scan = broken\n"
            "from interkit.cli import main\n"
            f"sys.exit(main(['show', {str(tmp_path / 'x.nc')!r}]))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 3, out.stderr
    assert "Traceback" not in out.stderr and out.stderr.count("\n") == 1, out.stderr


def test_readme_documents_the_exit_codes():
    readme = open(os.path.join(os.path.dirname(__file__), "..", "README.md"), encoding="utf-8").read()
    section = readme.split("## When something goes wrong", 1)[1].split("\n## ", 1)[0]
    for code in ("`0`", "`1`", "`2`", "`3`"):
        assert code in section, code
    for word in ("--scheduler", "TLS", "trust", "resum", "damaged"):
        assert word in readme, word


# ---------------------------------------------------------------------- item 14: counterpoise = false
@pytest.fixture(scope="module")
def uncorrected_scan(tmp_path_factory):
    folder = tmp_path_factory.mktemp("nocp")
    spec = _spec(folder, calculation='levels = ["hf/sto-3g", "mp2/sto-3g"]\ncounterpoise = false')
    return folder, spec


def test_uncorrected_scan_tables_show_and_compare(uncorrected_scan, capsys):
    """Without counterpoise, e_int is NaN by design; every table must use e_int_nocp and
    say so, instead of printing NaN or failing."""
    folder, spec = uncorrected_scan
    nc = folder / "scan.nc"
    assert main(["scan", str(spec), "-o", str(nc), "--serial", "--quiet", "--cache", str(folder / "store")]) == 0
    scan_out = capsys.readouterr().out
    assert main(["show", str(nc)]) == 0
    show_out = capsys.readouterr().out
    assert main(["compare", str(nc), "--table", str(folder / "rank.csv")]) == 0
    compare_out = capsys.readouterr().out
    for text in (scan_out, show_out, compare_out):
        assert "nan" not in text.lower(), text
        assert "uncorrected" in text, text
    ds = ik.open_scan(nc)
    # the printed well depth is the uncorrected curve's lowest point (2 points: no spline)
    depth = -float(ds["e_int_nocp"].sel(level="hf/sto-3g").min())
    assert f"{depth:.3f}" in show_out
    row = [ln for ln in compare_out.splitlines() if "HF/STO-3G" in ln and ln.strip()[:1].isdigit()]
    assert len(row) == 1, compare_out
    rmse = float(np.sqrt(np.mean((ds["e_int_nocp"].sel(level="hf/sto-3g").values
                                  - ds["e_int_nocp"].sel(level="mp2/sto-3g").values) ** 2)))
    assert f"{rmse:.3f}" in row[0], (rmse, row)


def test_uncorrected_scan_report(uncorrected_scan, capsys):
    folder, spec = uncorrected_scan
    nc = folder / "scan.nc"
    if not nc.exists():
        main(["scan", str(spec), "-o", str(nc), "--serial", "--quiet", "--cache", str(folder / "store")])
    html = folder / "r.html"
    assert main(["report", str(nc), "-o", str(html)]) == 0
    text = html.read_text(encoding="utf-8")
    assert "uncorrected" in text and ">nan<" not in text.lower()


# ---------------------------------------------------------------------- files interkit writes
def test_written_files_follow_the_umask(tmp_path, monkeypatch):
    """Common practice on Unix: a program's new files get 0o666 & ~umask (a temporary
    file's private 0600 must not leak into the final .nc)."""
    ds = _tiny_scan()
    old = os.umask(0o022)
    try:
        ik.save_scan(ds, tmp_path / "a.nc")
        ik.write_report(ds, tmp_path / "a.html") if hasattr(ik, "write_report") else \
            __import__("interkit.share.report").report.write_report(ds, tmp_path / "a.html")
        os.umask(0o002)
        ik.save_scan(ds, tmp_path / "b.nc")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(tmp_path / "a.nc").st_mode) == 0o644
    assert stat.S_IMODE(os.stat(tmp_path / "a.html").st_mode) == 0o644
    assert stat.S_IMODE(os.stat(tmp_path / "b.nc").st_mode) == 0o664


def test_report_temporary_file_is_not_predictable(tmp_path):
    """A link planted at a guessable temporary name must not redirect the write."""
    from interkit.share.report import write_report

    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    os.symlink(victim, tmp_path / f".tmp-{os.getpid()}-r.html")
    write_report(_tiny_scan(), tmp_path / "r.html")
    assert victim.read_text() == "keep me"
    assert (tmp_path / "r.html").read_text(encoding="utf-8").lstrip().startswith("<!DOCTYPE html")


def test_xyz_with_a_byte_order_mark_is_read(tmp_path):
    path = tmp_path / "bom.xyz"
    path.write_bytes(b"\xef\xbb\xbf" + HF_DIMER_XYZ.encode())
    dimer = ik.Dimer.from_xyz(path)
    assert dimer == ik.Dimer.from_xyz_string(HF_DIMER_XYZ, name="bom")
    assert ik.Dimer.from_xyz_string("\ufeff" + HF_DIMER_XYZ).symbols == ("F", "H", "F", "H")


def test_spec_with_a_byte_order_mark_is_read(tmp_path):
    """Editors on some systems start UTF-8 files with a byte-order mark (common practice)."""
    path = _spec(tmp_path)
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    assert ik.load_spec_toml(path).levels[0].label == "hf/sto-3g"


def test_plot_labels_with_dollar_signs_are_not_mathtext():
    """A level label is drawn as written: '$' must not switch matplotlib to mathtext."""
    import io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib import cbook

    from interkit.plot import plot_curves

    ds = _tiny_scan().assign_coords(level=["hf$x^{2$/sto-3g"])
    ax = plot_curves(ds, show_uncorrected=True)
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert texts and not any(cbook.is_math_text(t) for t in texts), texts
    ax.figure.savefig(io.BytesIO(), format="png")       # draws without a mathtext parse error
    plt.close(ax.figure)


def test_json_export_writes_null_for_nan(tmp_path):
    """A failed point (NaN) is exported as JSON null (standard JSON has no NaN)."""
    ds = _tiny_scan()
    ds["e_int"][...] = np.nan
    from interkit.share.export import write_json

    write_json(ds, tmp_path / "x.json")
    doc = json.loads((tmp_path / "x.json").read_text())
    assert doc["variables"]["e_int"]["values"] == [[None]]


def test_connect_passes_a_security_object(monkeypatch):
    """`--scheduler` is plain TCP unless a Dask security object is given: connect takes one."""
    distributed = require("distributed", "the Dask executor needs distributed (pip install -e .[dask])")
    import interkit.run.dask as ed

    seen = {}

    class FakeClient:
        def __init__(self, address, **kwargs):
            seen.update(kwargs, address=address)

    monkeypatch.setattr(distributed, "Client", FakeClient)
    marker = object()
    ed.connect("tls://127.0.0.1:8786", timeout=1.0, security=marker)
    assert seen["security"] is marker and seen["address"] == "tls://127.0.0.1:8786"


_TINY = {}


def _tiny_scan():
    """A one-point HF/STO-3G scan of the HF test dimer (computed once)."""
    if "ds" not in _TINY:
        spec = ik.ScanSpec(dimer=hf_dimer(), coordinate=ik.AtomPair(1, 2), factors=[1.0], levels=["hf/sto-3g"])
        _TINY["ds"] = ik.run_scan(spec, executor="serial", progress=False)
    return _TINY["ds"].copy(deep=True)
