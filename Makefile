# Two entry points a new user needs: `make demo` and `make test`.
PY ?= python3
VENV ?= .venv
BIN := $(VENV)/bin

.PHONY: demo test venv bench ci clean

$(BIN)/rhofollow: pyproject.toml
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test,dask]'
	touch $(BIN)/rhofollow

venv: $(BIN)/rhofollow

demo: venv
	$(BIN)/rhofollow demo

test: venv
	$(BIN)/python -m pytest -q

# What CI runs: a fresh clone under a ~150-character path, `make test` at COLUMNS=60, then the suite at
# COLUMNS=200 (see .ci/run).
ci:
	bash .ci/run

bench: venv
	for f in bench/bench_*.py; do $(BIN)/python $$f || exit 1; done

clean:
	rm -rf $(VENV) build *.egg-info
