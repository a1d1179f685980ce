# Two commands do everything on a fresh machine that has only Python:
#   make test   -> .venv, package + test extras, the whole test suite
#   make demo   -> .venv, package, the main job on the shipped example runs into out/demo/
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP_RUN := $(VENV)/.installed-run
STAMP_TEST := $(VENV)/.installed-test

.PHONY: test demo install clean bench

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

$(STAMP_RUN): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(STAMP_TEST): $(BIN)/python pyproject.toml
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $@ $(STAMP_RUN)

install: $(STAMP_RUN)

# -n 2: the tests run on two processes (pytest-xdist); plain `pytest` runs them in one.
test: $(STAMP_TEST)
	$(BIN)/python -m pytest -q -p no:cacheprovider -n 2

demo: $(STAMP_RUN)
	$(BIN)/dha demo -o out/demo

bench: $(STAMP_TEST)
	for f in benchmarks/*.py; do echo "== $$f"; $(BIN)/python $$f || exit 1; done

clean:
	rm -rf $(VENV) out .pytest_cache
