# interkit developer commands. `make demo` and `make test` do all set-up on a fresh clone.
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed
JS3DMOL := interkit/widgets/static/3Dmol-min.js

.PHONY: install demo test test-full lint bench lab clean

install: $(STAMP) $(JS3DMOL)

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e ".[test,dask]"
	touch $(STAMP)

## offline 3D views: 3Dmol.js from the npm registry (version py3Dmol expects); git-ignored
$(JS3DMOL): $(STAMP)
	$(PY) -m interkit.widgets.fetch_3dmol || echo "warning: 3Dmol.js not fetched (needs npm); 3D views will say so until it is"

## run the bundled demo scan (water-methanol, HF and B3LYP-D3(BJ)/def2-SVP); writes demo-output/
demo: install
	$(VENV)/bin/interkit demo -o demo-output

## lint + the test suite (unit, reference, resume, CLI); about 10 minutes on 2 cores
test: install
	$(VENV)/bin/ruff check interkit tests benchmarks
	$(PY) -m pytest -m "not slow" -q

## everything, including the slow reference checks (tens of minutes)
test-full: install
	$(PY) -m pytest -q

lint: install
	$(VENV)/bin/ruff check interkit tests benchmarks

## benchmarks print ratios against a straightforward baseline measured in the same run
bench: install
	$(PY) benchmarks/scan_throughput.py

lab: install
	$(PY) -m pip install --quiet jupyterlab
	$(VENV)/bin/jupyter lab notebooks/

clean:
	rm -rf $(VENV) demo-output .interkit-cache .pytest_cache
