# Two commands do all set-up: `make demo` and `make test`. Both create and reuse .venv.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
# Exact versions of everything .venv holds, so that every install gets the same libraries
# (the grid's values depend on them): `make lock` rewrites it from the current .venv.
LOCK := constraints/lock.txt

OLDEST := .venv-oldest
OLDEST_STAMP := $(OLDEST)/.installed

.PHONY: demo test test-oldest lock lint format bench readme clean chromium

$(STAMP): pyproject.toml $(LOCK)
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -c $(LOCK) -e '.[test,cluster]'
	touch $(STAMP)

# To move to newer releases: `.venv/bin/python -m pip install --upgrade -e '.[test,cluster]'`
# (or upgrade one package), `make test`, then `make lock` and commit constraints/lock.txt.
lock:
	@test -x $(BIN)/python || { echo "no $(VENV): run make test first"; exit 1; }
	{ echo "# Written by make lock from .venv ($$($(BIN)/python --version)); do not edit."; \
	  $(BIN)/python -m pip freeze --exclude-editable; } > $(LOCK)
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/workbench demo

lint: $(STAMP)
	$(BIN)/ruff check workbench tests benchmarks docs
	$(BIN)/ruff format --check workbench tests benchmarks docs

test: lint chromium
	$(BIN)/python -m pytest -q

# The declared floors: a separate venv with the lowest versions (constraints/oldest.txt) and
# the fast tests of the numerical stages. Not part of `make test` (it installs a second set).
$(OLDEST_STAMP): pyproject.toml constraints/oldest.txt
	$(PYTHON) -m venv $(OLDEST)
	$(OLDEST)/bin/python -m pip install --quiet --upgrade pip
	$(OLDEST)/bin/python -m pip install --quiet -c constraints/oldest.txt -e '.[test,cluster]'
	touch $(OLDEST_STAMP)

# One BLAS thread: numpy 1.26's multithreaded OpenBLAS makes a campaign's trace depend on
# its batch in the last bits (tests/engine/test_batch.py, measured); one thread does not.
test-oldest: $(OLDEST_STAMP)
	$(OLDEST)/bin/python -m pip list --format=freeze | grep -iE '^(numpy|scipy|scikit-learn|xarray)=='
	OPENBLAS_NUM_THREADS=1 $(OLDEST)/bin/python -m pytest -q -m "not slow" -p no:cacheprovider \
	  tests/engine tests/world tests/study/test_spec.py tests/study/test_runner.py \
	  tests/study/test_provenance.py

# Headless Chromium renders the HTML report in tests/report (Debian's packages): chromium for
# the screenshot, chromium-driver (/usr/bin/chromedriver) for the decision page's WebDriver test.
chromium:
	@{ command -v chromium >/dev/null && command -v chromedriver >/dev/null; } || { \
	  if [ "$$(id -u)" = 0 ]; then SUDO=; else SUDO=sudo; fi; \
	  $$SUDO apt-get update -qq && $$SUDO apt-get install -y -qq chromium chromium-driver; \
	} || echo "chromium could not be installed: the report's browser tests will be skipped"

format: $(STAMP)
	$(BIN)/ruff format workbench tests benchmarks docs
	$(BIN)/ruff check --fix workbench tests benchmarks docs

bench: $(STAMP)
	$(BIN)/python benchmarks/engine.py

# Rerun the demo and rewrite the README's quoted output and figures (docs/readme.py).
readme: $(STAMP)
	$(BIN)/python docs/readme.py

clean:
	rm -rf $(VENV) $(OLDEST) .pytest_cache .ruff_cache
