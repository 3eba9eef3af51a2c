# Two entry points: `make serve` and `make test`. Both bootstrap .venv from nothing but python3.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: serve test clean-venv bench

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

serve: $(STAMP)
	$(BIN)/stressmap serve --demo

test: $(STAMP)
	$(BIN)/python -m pytest stressmap tests

bench: $(STAMP)
	for f in benchmarks/*.py; do $(BIN)/python $$f || exit 1; done

clean-venv:
	rm -rf $(VENV)
