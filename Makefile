# Two set-up commands for a fresh machine: `make demo` and `make test`.
PY      ?= python3
VENV    ?= .venv
VPY     := $(VENV)/bin/python
PIP     := $(VENV)/bin/pip
STAMP   := $(VENV)/.installed
TSTAMP  := $(VENV)/.installed-test

.PHONY: demo test venv install install-test system-deps bench clean

$(VPY):
	$(PY) -m venv $(VENV)
	$(PIP) install --quiet --upgrade pip

$(STAMP): pyproject.toml | $(VPY)
	$(PIP) install --quiet -e .
	touch $@

$(TSTAMP): pyproject.toml | $(VPY)
	$(PIP) install --quiet -e '.[test]'
	touch $@ $(STAMP)

install: $(STAMP)
install-test: $(TSTAMP)

## make demo: create .venv, install, run the whole analysis on the invented region
demo: $(STAMP)
	$(VENV)/bin/geo-reach demo --overwrite

## system-deps: the Debian packages the browser test needs (headless Chromium)
system-deps:
	@if command -v chromium >/dev/null 2>&1; then \
	  echo "system-deps: chromium present"; \
	elif [ "$$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then \
	  echo "system-deps: installing Debian package chromium (for the browser test)"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null; \
	else \
	  echo "system-deps: the browser test needs headless Chromium; install it as root with: apt-get install chromium"; \
	fi

## make test: create .venv, install with test extras and system packages, run pytest
test: $(TSTAMP) system-deps
	$(VENV)/bin/pytest -q

## make bench: every benchmark script at full size (not CI; see benchmarks/RESULTS.md)
bench: $(TSTAMP)
	$(VPY) benchmarks/run_all.py

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache
