# Everything a developer or CI needs: `make run` and `make test` work on a fresh machine with
# only python3 and make. Versions are pinned by constraints.txt, shared with the container recipe.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
HOST   ?= 127.0.0.1
PORT   ?= 8000

.PHONY: install run demo test lint format openapi bench image-check clean

$(STAMP): pyproject.toml constraints.txt clients/python/pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --disable-pip-version-check -c constraints.txt \
		-e '.[dev]' -e './clients/python[all]'
	touch $(STAMP)

install: $(STAMP)

run: install
	$(BIN)/python -m knotwork --host $(HOST) --port $(PORT)

demo: install
	$(BIN)/python -m knotwork.demo

lint: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .

format: install
	$(BIN)/ruff format .
	$(BIN)/ruff check --fix .

test: lint
	$(BIN)/pytest

bench: install
	$(BIN)/python bench/run_all.py

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache .mypy_cache .hypothesis
