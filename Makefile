# harbourwatch: the commands a user and CI type. Each target sets itself up.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-stamp
OUT    ?= demo_out
JOBS   ?= 2

.PHONY: all setup demo test lint typecheck bench browser-deps clean

all: test

$(STAMP): pyproject.toml
	test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

setup: $(STAMP)

demo: $(STAMP)
	$(BIN)/harbourwatch demo --out $(OUT)

# Headless Chromium for the browser tests: Debian's package, when we may install it.
browser-deps:
	@command -v chromium >/dev/null 2>&1 || { \
	  if [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
	    echo "installing Debian's chromium for the browser tests"; \
	    (apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null) \
	      || echo "could not install chromium: browser tests will be skipped"; \
	  else echo "chromium not found: browser tests will be skipped"; fi; }

# ruff, and the layout contract: stages import only from the stages below them, no cycle
lint: $(STAMP)
	$(BIN)/ruff check harbourwatch tests bench
	$(BIN)/python -m pytest -q -p no:cacheprovider tests/test_layers.py

typecheck: $(STAMP)
	$(BIN)/mypy harbourwatch

test: $(STAMP) browser-deps lint typecheck
	$(BIN)/python -m pytest -n $(JOBS) -q tests harbourwatch --doctest-modules

bench: $(STAMP)
	$(BIN)/python -m bench.run

clean:
	rm -rf $(VENV) $(OUT) bench_out .pytest_cache .hypothesis .ruff_cache .mypy_cache
