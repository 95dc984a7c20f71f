# calib — developer entry points. Every target that runs code depends on `venv`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: venv demo demo-reference atlas atlas-points-report atlas-large atlas-large-tables atlas-check atlas-reproduce test bench clean

venv: $(STAMP)

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

SHELL       := /bin/bash
.SHELLFLAGS := -o pipefail -c

# The quickstart: its store, then its table, timings and report from one analysis (`calib tables --html`);
# what both commands print is kept beside them (run.txt, tables.txt), with the wall time of the whole.
DEMO := results/quickstart
demo: venv
	@mkdir -p $(DEMO); start=$$(date +%s); \
	$(BIN)/calib run instances/quickstart.toml --out $(DEMO) | tee $(DEMO)/run.txt && \
	$(BIN)/calib tables $(DEMO)/quickstart.sqlite --tau 0.01 0.05 0.1 \
	    --json $(DEMO)/safe_k.json --csv $(DEMO)/safe_k.csv \
	    --timings $(DEMO)/timings.csv --html $(DEMO)/report.html | tee $(DEMO)/tables.txt && \
	echo "make demo: $$(( $$(date +%s) - start )) s after the install" | tee -a $(DEMO)/run.txt

# The demo run the README quotes, shipped in results/demo/ (your own `make demo` writes results/quickstart/):
# after a new demo run, copy it there and write the README's generated sections from it (they are
# checked against these files by tests/test_readme_numbers.py).
demo-reference:
	mkdir -p results/demo
	cp $(DEMO)/safe_k.json $(DEMO)/safe_k.csv $(DEMO)/timings.csv $(DEMO)/report.html \
	    $(DEMO)/run.txt $(DEMO)/tables.txt results/demo/
	$(BIN)/python tests/readme_numbers.py --write

# The atlas (instances/atlas*.toml): about 50 minutes on 2 cores (README, "The atlas"); resumable (run it
# again after a stop). Each table and its report come from one analysis (`calib tables --html`), at the
# predicate and tolerance of the campaign's own [target], so a report cannot contradict its table.
# ATLAS_RUN="--scheduler tcp://HOST:8786" runs it on a Dask cluster (docs/distributed.md).
ATLAS     := results/atlas
ATLAS_RUN ?=
atlas: venv
	$(BIN)/calib run instances/atlas.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-points.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-clustering.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib run instances/atlas-milp.toml --out $(ATLAS) $(ATLAS_RUN)
	$(BIN)/calib tables $(ATLAS)/atlas.sqlite --preset bound --tau 0.05 0.1 \
	    --json $(ATLAS)/safe_k.json --csv $(ATLAS)/safe_k.csv --timings $(ATLAS)/timings.csv \
	    --html $(ATLAS)/report.html
	$(BIN)/calib tables $(ATLAS)/atlas-points.sqlite --preset distortion --tau 0.3 \
	    --json $(ATLAS)/safe_k-points.json --csv $(ATLAS)/safe_k-points.csv --timings $(ATLAS)/timings-points.csv \
	    --html $(ATLAS)/report-points.html
	$(BIN)/calib tables $(ATLAS)/atlas-clustering.sqlite --preset clustering --tau 0.02 0.05 0.1 \
	    --json $(ATLAS)/safe_k-clustering.json --csv $(ATLAS)/safe_k-clustering.csv --timings $(ATLAS)/timings-clustering.csv \
	    --html $(ATLAS)/report-clustering.html
	$(BIN)/calib tables $(ATLAS)/atlas-milp.sqlite --preset usable --tau 0.05 0.1 \
	    --json $(ATLAS)/safe_k-milp.json --csv $(ATLAS)/safe_k-milp.csv --timings $(ATLAS)/timings-milp.csv \
	    --html $(ATLAS)/report-milp.html

# The point-set report drawn again from the committed table and timings alone (no store needed):
# `calib report TABLE --spec SPEC` checks the spec's fingerprint against the table's.
atlas-points-report: venv
	$(BIN)/calib report $(ATLAS)/safe_k-points.json --spec instances/atlas-points.toml --html $(ATLAS)/report-points.html

# The large tier (docs/large-tier.md): its campaign into build/ (resumable: run it again after a stop;
# ATLAS_RUN as above), then the tables, the compressed store and its checksums in results/atlas-large/.
LARGE       := results/atlas-large
LARGE_STORE := build/atlas-large
atlas-large: venv
	$(BIN)/calib run instances/atlas-large-sparse.toml --out $(LARGE_STORE) $(ATLAS_RUN) | tee $(LARGE)/run.txt
	$(MAKE) --no-print-directory atlas-large-tables STORE=$(LARGE_STORE)/atlas-large-sparse.sqlite
	xz -T2 -6 -c $(LARGE_STORE)/atlas-large-sparse.sqlite > $(LARGE)/atlas-large-sparse.sqlite.xz
	cd $(LARGE) && sha256sum atlas-large-sparse.sqlite.xz > SHA256SUMS && \
	    (cd $(CURDIR)/$(LARGE_STORE) && sha256sum atlas-large-sparse.sqlite) >> SHA256SUMS

# The shipped large-tier store, checked against its checksums and unpacked into build/ (no solve).
SHIPPED_LARGE := build/shipped-large/atlas-large-sparse.sqlite
$(SHIPPED_LARGE): $(LARGE)/atlas-large-sparse.sqlite.xz $(LARGE)/SHA256SUMS
	mkdir -p $(dir $@)
	cd $(LARGE) && grep ' atlas-large-sparse.sqlite.xz$$' SHA256SUMS | sha256sum -c -
	xz -d -c $(LARGE)/atlas-large-sparse.sqlite.xz > $@
	cd $(dir $@) && grep ' atlas-large-sparse.sqlite$$' $(CURDIR)/$(LARGE)/SHA256SUMS | sha256sum -c -

# Re-analysis without a re-run: the tables of a large-tier store at another predicate or tolerance,
# e.g. `make atlas-large-tables PRESET=bound TAU="0.05 0.1" OUT=build/reread` (default: the shipped store).
STORE  ?= $(SHIPPED_LARGE)
PRESET ?= usable
TAU    ?= 0.05
OUT    ?= $(LARGE)
atlas-large-tables: venv $(STORE)
	mkdir -p $(OUT)
	$(BIN)/calib tables $(STORE) --preset $(PRESET) --tau $(TAU) --policy \
	    --json $(OUT)/safe_k-sparse.json --csv $(OUT)/safe_k-sparse.csv --timings $(OUT)/timings-sparse.csv \
	    --html $(OUT)/report-sparse.html > $(OUT)/tables-sparse.txt

# The stated sample: one trial in each of ATLAS_CELLS cells of the shipped large-tier store (family,
# size, projector; picked by ATLAS_SEED alone) solved again in a fresh worker and compared with its
# stored row: every value but timings equal, or apart by rounding only (`calib rerun --sample`).
ATLAS_CELLS ?= 9
ATLAS_SEED  ?= 1
atlas-check: venv $(SHIPPED_LARGE)
	$(BIN)/calib rerun $(SHIPPED_LARGE) --sample $(ATLAS_CELLS) --seed $(ATLAS_SEED)

# Reproduction of the small tier: the atlas run again into a scratch folder; its tables must equal the
# committed ones byte for byte (timings and reports rest on wall times and are not compared).
ATLAS_CHECK ?= build/atlas-check
atlas-reproduce: venv
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
