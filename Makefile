# Two commands do all set-up: `make demo` and `make test`. Both create and reuse .venv.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: demo test lint format bench readme clean chromium

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test,cluster]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/workbench demo

lint: $(STAMP)
	$(BIN)/ruff check workbench tests benchmarks docs
	$(BIN)/ruff format --check workbench tests benchmarks docs

test: lint chromium
	$(BIN)/python -m pytest -q

# Headless Chromium renders the HTML report in tests/test_report.py (Debian's package).
chromium:
	@command -v chromium >/dev/null || { \
	  if [ "$$(id -u)" = 0 ]; then SUDO=; else SUDO=sudo; fi; \
	  $$SUDO apt-get update -qq && $$SUDO apt-get install -y -qq chromium; \
	} || echo "chromium could not be installed: the report rendering test will be skipped"

format: $(STAMP)
	$(BIN)/ruff format workbench tests benchmarks docs
	$(BIN)/ruff check --fix workbench tests benchmarks docs

bench: $(STAMP)
	$(BIN)/python benchmarks/engine.py

# Rerun the demo and rewrite the README's quoted output and figures (docs/readme.py).
readme: $(STAMP)
	$(BIN)/python docs/readme.py

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache
