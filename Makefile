# Two commands set everything up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test venv clean bench bench-all

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
bench: $(STAMP)
	@for b in $(BENCH_TABLE); do echo "== benchmarks/bench_$$b.py"; \
	  $(BIN)/python benchmarks/bench_$$b.py | tee -a .bench.log || exit 1; done; \
	echo "== summary"; grep '^RESULT' .bench.log; rm -f .bench.log

bench-all: bench
	$(BIN)/python benchmarks/bench_weighting.py
	$(BIN)/python benchmarks/bench_impute.py

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis
