# Two commands set everything up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test venv clean bench bench-all bench-scale render

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(STAMP): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

venv: $(STAMP)

demo: $(STAMP)
	$(BIN)/skipwise demo --out out --overwrite

test: $(STAMP)
	$(BIN)/python -m pytest

# The speed table's workloads (benchmarks/README.md); SKIPWISE_BENCH_SCALE scales the cases.
BENCH_TABLE := classify faults cli_sav recoded_dta report little pmm
bench: SHELL := /bin/bash
bench: $(STAMP)
	@set -o pipefail; rm -f .bench.log; start=$$(date +%s); for b in $(BENCH_TABLE); do echo "== benchmarks/bench_$$b.py"; t=$$(date +%s); \
	  $(BIN)/python benchmarks/bench_$$b.py | tee -a .bench.log || exit 1; \
	  echo "   (bench_$$b.py took $$(( $$(date +%s) - t )) s)" | tee -a .bench.log; done; \
	echo "== summary"; grep -e '^RESULT' -e 'took' .bench.log; \
	echo "make bench took $$(( $$(date +%s) - start )) s"; rm -f .bench.log

bench-all: bench
	$(BIN)/python benchmarks/bench_weighting.py
	$(BIN)/python benchmarks/bench_impute.py

# The dask engine on a tiled invented survey (5M x 100 at scale 1; SKIPWISE_BENCH_SCALE scales it), apart from
# `make bench`: it starts a local cluster and needs several GB of disk for the parts (SKIPWISE_BENCH_TMP: where).
bench-scale: $(STAMP)
	$(BIN)/python benchmarks/bench_scale.py

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis

# The demo's workbooks as a reader sees them: LibreOffice (headless) -> PDF -> PNG pages under out/render/.
# Needs soffice (Debian package libreoffice-calc) and, for the PNGs, pdftoppm (poppler-utils).
render: demo
	@command -v soffice >/dev/null || { echo "make render needs LibreOffice: apt-get install libreoffice-calc (and poppler-utils for PNG pages)"; exit 1; }
	@mkdir -p out/render; profile=$$(mktemp -d); \
	for wb in item_report diagnostics weighting; do \
	  mkdir -p out/render/$$wb; \
	  soffice -env:UserInstallation=file://$$profile --headless --convert-to pdf --outdir out/render/$$wb out/package/$$wb.xlsx >/dev/null 2>&1 || { rm -rf $$profile; echo "LibreOffice could not convert $$wb.xlsx"; exit 1; }; \
	  rm -f out/render/$$wb/page-*.png; \
	  if command -v pdftoppm >/dev/null; then pdftoppm -r 60 -png out/render/$$wb/$$wb.pdf out/render/$$wb/page; fi; \
	  if command -v pdfinfo >/dev/null; then echo "$$wb: $$(pdfinfo out/render/$$wb/$$wb.pdf | awk '/^Pages:/ {print $$2}') pages -> out/render/$$wb/"; fi; \
	done; rm -rf $$profile
