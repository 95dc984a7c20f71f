# calib — developer entry points. Every target that runs code depends on `venv`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: venv demo test bench clean

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

test: venv
	$(BIN)/python -m pytest -q

bench: venv
	$(BIN)/python -m pytest -q tests/benchmarks --benchmark-only --benchmark-columns=min,median,max

clean:
	rm -rf $(VENV) build *.egg-info
