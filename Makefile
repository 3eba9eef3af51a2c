# Two entry points: `make serve` and `make test`. Both bootstrap .venv from nothing but python3.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
# npm ci writes node_modules/.package-lock.json: the map page's pinned web library is installed.
NODE_STAMP := node_modules/.package-lock.json

.PHONY: serve test clean-venv bench

# setuptools announces how it wires the editable install (api/ installs as stressmap_api) as a
# warning; it is information only, so that one message is filtered and the install stays quiet.
$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	PYTHONWARNINGS="ignore:Editable installation" $(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

$(NODE_STAMP): package.json package-lock.json
	@if command -v npm >/dev/null 2>&1; then npm ci --no-audit --no-fund --loglevel=error; \
	else echo "note: npm not found; the service runs, but its map page needs Node.js and npm (then run make again)"; fi

# `make serve PORT=8080` (or PORT in the environment) chooses the port; default 8000.
serve: $(STAMP) $(NODE_STAMP)
	$(BIN)/stressmap serve --demo $(if $(PORT),--port $(PORT))

test: $(STAMP) $(NODE_STAMP)
	$(BIN)/python -m pytest stressmap tests

bench: $(STAMP) $(NODE_STAMP)
	for f in benchmarks/*.py; do $(BIN)/python $$f || exit 1; done

clean-venv:
	rm -rf $(VENV)
