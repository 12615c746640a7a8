# Two commands set everything up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test venv clean bench

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

bench: $(STAMP)
	for f in benchmarks/bench_*.py; do echo "== $$f"; $(BIN)/python $$f || exit 1; done

clean:
	rm -rf $(VENV) out .pytest_cache .hypothesis
