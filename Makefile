# matdb: two commands on a fresh clone: `make run` and `make test`.
PY ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
PORT ?= 8501

.PHONY: run test lint bench seed install clean browser-deps report-page

$(BIN)/python:
	$(PY) -m venv $(VENV)
	$(BIN)/python -m pip install --upgrade --quiet pip

$(STAMP): pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e ".[test]"
	touch $(STAMP)

install: $(STAMP)

seed: install
	$(BIN)/matdb seed

run: install seed
	$(BIN)/matdb serve --port $(PORT)

lint: install
	$(BIN)/python -m ruff check .

test: install lint
	$(BIN)/python -m pytest -q -p no:cacheprovider -n 2 --dist loadfile

report-page: install
	$(BIN)/python scripts/report_page.py

# every speed goal in one table (BENCH_ARGS: e.g. --skip-80mm, --repeats 5, --details)
bench: install
	nice -n 10 $(BIN)/python scripts/bench.py $(BENCH_ARGS)

clean:
	rm -rf $(VENV) build *.egg-info test-artifacts
