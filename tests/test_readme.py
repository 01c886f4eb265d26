"""Every ```python block of README.md runs, in order, in one namespace (issue 13, item 2).

README and code cannot drift: a renamed function, a changed argument or a name missing from
``import interkit as ik`` fails here. To keep the run cheap the blocks are run with
documented substitutions (:data:`SUBSTITUTIONS`), applied to the text of every block:

* every basis set named in the README becomes ``sto-3g`` (the methods, dispersion schemes
  and settings stay; a level list never names one method twice, so the labels stay distinct
  and every ``sel(level=...)`` still finds its curve),
* every ``factors=[...]`` grid becomes four points, ``[0.95, 1.05, 1.25, 1.6]``,
* the SAPT0 decomposition runs in ``sto-3g`` (``decomposition_basis``) instead of the
  default jun-cc-pVDZ.

Running every block takes minutes (a dozen small scans), so that test is marked slow
(``make test-full``); a cheap test that always runs checks that every ``ik.NAME`` and every
``from interkit... import`` of the blocks resolves. The blocks run in a temporary folder (files they write land there) with the default
store pointed at a temporary folder (tests/conftest.py) and matplotlib without a display.
A block that starts with ``# readme-test: skip (<reason>)`` is not run; only the two batch-system
blocks are (they need a batch system).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from conftest import require

README = Path(__file__).resolve().parents[1] / "README.md"
SKIP_MARK = "# readme-test: skip"
BASES = ("aug-cc-pvdz", "aug-cc-pvtz", "def2-svp", "def2-tzvp", "cc-pvdz")
SUBSTITUTIONS = (
    *((re.compile(rf"(?<=/){re.escape(b)}\b"), "sto-3g") for b in BASES),
    (re.compile(r"factors=\[[^\]]*\]"), "factors=[0.95, 1.05, 1.25, 1.6]"),
    (re.compile(r'decomposition="sapt0"'), 'decomposition="sapt0", decomposition_basis="sto-3g"'),
)


def python_blocks(text: str) -> list[tuple[int, str]]:
    """(line number, code) of every ```python block, in order."""
    out, lines, k = [], text.splitlines(), 0
    while k < len(lines):
        if lines[k].strip() == "```python":
            start, body = k + 1, []
            k += 1
            while lines[k].strip() != "```":
                body.append(lines[k])
                k += 1
            out.append((start + 1, "\n".join(body) + "\n"))
        k += 1
    return out


def cheap(code: str) -> str:
    for pattern, replacement in SUBSTITUTIONS:
        code = pattern.sub(replacement, code)
    return code


def test_readme_blocks_are_found_and_skips_are_rare():
    blocks = python_blocks(README.read_text(encoding="utf-8"))
    assert len(blocks) >= 8
    skipped = [line for line, code in blocks if code.lstrip().startswith(SKIP_MARK)]
    assert len(skipped) <= 2, f"README blocks skipped at lines {skipped}: keep skips rare"
    # the only blocks that may be skipped are those that need a batch system
    assert all("batch system" in code.splitlines()[0] for _, code in blocks if code.lstrip().startswith(SKIP_MARK))
    # the substitutions do what the docstring says
    assert cheap('levels=["hf/def2-svp", "mp2/aug-cc-pvdz"], factors=[0.9, 1.0]') == \
        'levels=["hf/sto-3g", "mp2/sto-3g"], factors=[0.95, 1.05, 1.25, 1.6]'


def test_every_name_the_readme_uses_exists():
    # cheap, always run: every ik.NAME chain and every "from interkit... import" of the
    # python blocks resolves after `import interkit as ik` (modules on first use included)
    import importlib

    import interkit as ik

    text = "".join(code for _, code in python_blocks(README.read_text(encoding="utf-8")))
    chains = set(re.findall(r"\bik((?:\.[A-Za-z_]\w*)+)", text))
    assert len(chains) > 10
    for chain in sorted(chains):
        obj = ik
        for part in chain.strip(".").split("."):
            assert hasattr(obj, part), f"README uses ik{chain}, but {part!r} is missing"
            obj = getattr(obj, part)
            if not isinstance(obj, type(ik)):   # stop at the first non-module (results, classes)
                break
    for module, names in re.findall(r"^\s*from (interkit[\w.]*) import ([\w, ]+)", text, re.M):
        mod = importlib.import_module(module)
        for name in (n.strip() for n in names.split(",")):
            assert hasattr(mod, name), f"README imports {name} from {module}, which has none"


@pytest.mark.slow
def test_every_readme_python_block_runs(tmp_path, monkeypatch):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot
    require("ipywidgets", "the notebook layer needs ipywidgets (pip install -e .[test])")
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    namespace: dict = {"__name__": "readme"}
    for line, code in python_blocks(README.read_text(encoding="utf-8")):
        if code.lstrip().startswith(SKIP_MARK):
            continue
        try:
            exec(compile(cheap(code), f"README.md:{line}", "exec"), namespace)
        except Exception as exc:
            raise AssertionError(f"README.md python block at line {line} failed: "
                                 f"{type(exc).__name__}: {exc}\n{cheap(code)}") from exc
        finally:
            matplotlib.pyplot.close("all")
