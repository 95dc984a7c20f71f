# calib — developer entry points. Every target that runs code depends on `venv`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: venv demo atlas atlas-check test bench clean

venv: $(STAMP)

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: venv
	$(BIN)/calib run instances/quickstart.toml --out results/quickstart
	$(BIN)/calib tables results/quickstart/quickstart.sqlite \
	    --json results/quickstart/safe_k.json --csv results/quickstart/safe_k.csv \
	    --timings results/quickstart/timings.csv --tau 0.01 0.05 0.1
	$(BIN)/calib report results/quickstart/quickstart.sqlite --html results/quickstart/report.html

# The atlas (instances/atlas*.toml): about an hour on 2 cores; resumable (run it again after a stop).
# ATLAS_RUN="--scheduler tcp://HOST:8786" runs it on a Dask cluster (docs/distributed.md).
ATLAS     := results/atlas
ATLAS_RUN ?=
atlas: venv
	$(BIN)/calib run instances/atlas.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-points.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-clustering.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-milp.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib tables $(ATLAS)/atlas.sqlite --preset bound --tau 0.05 0.1 \
	    --json $(ATLAS)/safe_k.json --csv $(ATLAS)/safe_k.csv --timings $(ATLAS)/timings.csv
	$(BIN)/calib tables $(ATLAS)/atlas-points.sqlite --preset distortion --tau 0.3 \
	    --json $(ATLAS)/safe_k-points.json --csv $(ATLAS)/safe_k-points.csv --timings $(ATLAS)/timings-points.csv
	$(BIN)/calib report $(ATLAS)/atlas.sqlite --preset bound --html $(ATLAS)/report.html
	$(BIN)/calib report $(ATLAS)/atlas-points.sqlite --preset distortion --html $(ATLAS)/report-points.html
	$(BIN)/calib tables $(ATLAS)/atlas-clustering.sqlite --preset clustering --tau 0.02 0.05 0.1 \
	    --json $(ATLAS)/safe_k-clustering.json --csv $(ATLAS)/safe_k-clustering.csv --timings $(ATLAS)/timings-clustering.csv
	$(BIN)/calib report $(ATLAS)/atlas-clustering.sqlite --preset clustering --html $(ATLAS)/report-clustering.html
	$(BIN)/calib tables $(ATLAS)/atlas-milp.sqlite --preset usable --tau 0.05 0.1 \
	    --json $(ATLAS)/safe_k-milp.json --csv $(ATLAS)/safe_k-milp.csv --timings $(ATLAS)/timings-milp.csv
	$(BIN)/calib report $(ATLAS)/atlas-milp.sqlite --preset usable --html $(ATLAS)/report-milp.html

# Reproduction: the atlas run again into a scratch folder; its tables must equal the committed ones
# byte for byte (timings and reports rest on wall times and are not compared).
ATLAS_CHECK ?= build/atlas-check
atlas-check: venv
	rm -rf $(ATLAS_CHECK)
	$(MAKE) --no-print-directory atlas ATLAS=$(ATLAS_CHECK)
	for name in safe_k.json safe_k.csv safe_k-points.json safe_k-points.csv safe_k-clustering.json safe_k-clustering.csv \
	            safe_k-milp.json safe_k-milp.csv; do \
	    cmp $(ATLAS)/$$name $(ATLAS_CHECK)/$$name || exit 1; done
	@echo "the atlas tables are reproduced byte for byte"

test: venv
	$(BIN)/python -m pytest -q

bench: venv
	$(BIN)/python -m pytest -q tests/benchmarks --benchmark-only --benchmark-columns=min,median,max

clean:
	rm -rf $(VENV) build *.egg-info
