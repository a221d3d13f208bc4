# Everything a developer or CI needs: `make run` and `make test` work on a fresh machine with
# only python3 and make. Versions are pinned by constraints.txt, shared with the container recipe.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed
HOST   ?= 127.0.0.1
PORT   ?= 8000

.PHONY: install run demo test lint format openapi bench image-check clean

$(STAMP): pyproject.toml constraints.txt clients/python/pyproject.toml contract/pyproject.toml \
		harness/pyproject.toml
	$(PYTHON) -m venv $(VENV)
	PIP_CONSTRAINT=$(CURDIR)/constraints.txt $(BIN)/pip install --quiet \
		--disable-pip-version-check -c constraints.txt \
		-e ./contract -e '.[dev]' -e './clients/python[all]' -e ./harness
	touch $(STAMP)

install: $(STAMP)

run: install
	$(BIN)/python -m knotwork --host $(HOST) --port $(PORT)

# In process by default; `make demo URL=http://127.0.0.1:8000` posts to a running service.
demo: install
	$(BIN)/python -m knotwork.demo $(if $(URL),--url $(URL))

lint: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/mypy

format: install
	$(BIN)/ruff format .
	$(BIN)/ruff check --fix .

test: lint
	$(BIN)/pytest

openapi: install
	$(BIN)/python -m knotwork.api.openapi

# Each script prints its own side-by-side ratios; --quick keeps the whole set to a few minutes.
bench: install
	for script in bench/bench_*.py; do echo "== $$script"; $(BIN)/python $$script --quick || exit 1; done

# Builds the container recipe on a locally made base image and runs it on a loopback port.
image-check: install
	bash deploy/image-check.sh

clean:
	rm -rf $(VENV) .pytest_cache .ruff_cache .mypy_cache .hypothesis
