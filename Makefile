# Two set-up commands: `make demo` and `make test`. Both build .venv from pyproject.toml.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
DEMO   := examples/dimethoxybenzene-catholytes

.PHONY: demo test bench clean browser screenshot

# Headless Chromium and its driver (Debian packages) for the browser test of the report and
# the screenshot; installed only when missing (needs root, as on our machines and CI).
CHROMIUM_FLAGS := --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
	--disable-background-networking --disable-component-update --disable-sync --hide-scrollbars

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

browser:
	@command -v chromium >/dev/null 2>&1 && command -v chromedriver >/dev/null 2>&1 || \
	  { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
	    chromium chromium-driver fonts-dejavu-core >/dev/null; }

# The first screen of the demo report, as shown in the README (runs the demo first).
screenshot: demo browser
	profile=$$(mktemp -d) && chromium $(CHROMIUM_FLAGS) --user-data-dir=$$profile \
	  --window-size=1400,900 --screenshot=docs/report-screenshot.png \
	  "file://$(CURDIR)/$(DEMO)/results/report.html" >/dev/null 2>&1; rc=$$?; rm -rf $$profile; exit $$rc

# pytest exits 5 when it collects no tests; that is not a failure of the build.
test: $(VENV)/.installed-test browser
	$(BIN)/python -m pytest -q tests; rc=$$?; if [ $$rc -eq 5 ]; then exit 0; else exit $$rc; fi

bench: $(VENV)/.installed-test
	$(BIN)/python benchmarks/run_all.py

clean:
	rm -rf $(VENV) build src/*.egg-info
