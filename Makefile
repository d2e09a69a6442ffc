# Two commands set everything up on a fresh machine: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
DEMO_DIR ?= demo_project

.PHONY: demo test bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/reval demo $(DEMO_DIR)

test: $(STAMP)
	$(BIN)/ruff check .
	$(BIN)/mypy
	$(BIN)/python -m pytest -q

bench: $(STAMP)
	$(BIN)/python -m pip install --quiet -e '.[bench]'
	$(BIN)/python bench/pipeline_scale.py
	$(BIN)/python bench/accuracy.py
	$(BIN)/python bench/demo_scale.py

clean:
	rm -rf $(VENV) $(DEMO_DIR)
