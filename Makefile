# Every target that runs something first makes sure .venv exists and is current,
# so `make test` and `make demo` work on a fresh clone with nothing installed by hand.
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed

.PHONY: setup test demo check bench baselines lint format clean

setup: $(STAMP)

# scikit-learn-extra's published wheel is built against numpy 1.x; build it from source
# against the installed numpy 2, without build isolation (see DEVELOPERS.md).
$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PY) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet "numpy>=2.0" "scikit-learn>=1.5" cython setuptools wheel
	$(BIN)/python -c "import sklearn_extra.cluster" 2>/dev/null || \
	  $(BIN)/pip install --quiet --no-build-isolation --no-binary scikit-learn-extra scikit-learn-extra
	$(BIN)/pip install --quiet -e ".[test]"
	$(BIN)/python -c "from sklearn_extra.cluster import KMedoids; import topoaudit"
	touch $(STAMP)

# The browser tests drive Chromium: .ci/browser.py finds one or installs it (apt as root,
# else Playwright's download), or says in one line what to run and stops before any test.
test: $(STAMP)
	browser="$$($(BIN)/python .ci/browser.py)" && \
	  $(BIN)/ruff check src tests reference_checks && \
	  TOPOAUDIT_CHROMIUM="$$browser" $(BIN)/python -m pytest -n auto --dist loadgroup src tests reference_checks

demo: $(STAMP)
	$(BIN)/topoaudit demo --out build/demo

check: $(STAMP)
	$(BIN)/topoaudit check

bench: $(STAMP)
	$(BIN)/python -m tests.benchmarks.run
	$(BIN)/python -m tests.benchmarks.shape
	$(BIN)/python -m tests.benchmarks.audit
	$(BIN)/python -m tests.benchmarks.scale
	$(BIN)/python -m tests.benchmarks.site
	$(BIN)/python -m tests.benchmarks.grid
	$(BIN)/python -m tests.benchmarks.grid_band

# Rewrites the visual suite's spec snapshots, chart images and page screenshots; review
# the changed files under tests/visual/baselines before committing them.
baselines: $(STAMP)
	TOPOAUDIT_UPDATE_BASELINES=1 $(BIN)/python -m pytest tests/visual -q -k "matches"

lint: $(STAMP)
	$(BIN)/ruff check src tests reference_checks
	$(BIN)/ruff format --check src tests reference_checks

format: $(STAMP)
	$(BIN)/ruff format src tests reference_checks
	$(BIN)/ruff check --fix src tests reference_checks

clean:
	rm -rf $(VENV) build .pytest_cache
