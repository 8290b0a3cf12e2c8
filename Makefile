# Two set-up commands: `make demo` and `make test`. Both build .venv from pyproject.toml.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
DEMO   := examples/dimethoxybenzene-catholytes

.PHONY: demo test bench clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -q -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install -q -e '.[test]'
	touch $@ $(VENV)/.installed

demo: $(VENV)/.installed
	$(BIN)/redoxfront run $(DEMO)

# pytest exits 5 when it collects no tests; that is not a failure of the build.
test: $(VENV)/.installed-test
	$(BIN)/python -m pytest -q tests; rc=$$?; if [ $$rc -eq 5 ]; then exit 0; else exit $$rc; fi

bench: $(VENV)/.installed-test
	$(BIN)/python benchmarks/run_all.py

clean:
	rm -rf $(VENV) build src/*.egg-info
