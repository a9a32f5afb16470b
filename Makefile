# The front door: `make demo` runs the main job, `make test` runs the checks.
PYTHON ?= python3.11
VENV   := .venv
BIN    := $(VENV)/bin
# The CPU build of torch; a looser requirement would pull a multi-GB CUDA build.
TORCH  := torch==2.13.0
STAMP  := $(VENV)/.installed

.PHONY: demo test soak lint type format bench clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet "$(TORCH)"
	$(BIN)/pip install --quiet -e ".[test]" "$(TORCH)"
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/flockward demo

test: $(STAMP)
	$(BIN)/ruff check envs baselines tests
	$(BIN)/ruff format --check envs baselines tests
	$(BIN)/mypy
	$(BIN)/python -m pytest -q

# The long checks (a million random-action world-steps over every scenario); CI runs them too.
soak: $(STAMP)
	$(BIN)/python -m pytest -q -m expensive

lint: $(STAMP)
	$(BIN)/ruff check envs baselines tests

type: $(STAMP)
	$(BIN)/mypy

format: $(STAMP)
	$(BIN)/ruff format envs baselines tests
	$(BIN)/ruff check --fix envs baselines tests

bench: $(STAMP)
	$(BIN)/flockward bench

clean:
	rm -rf $(VENV) build dist .pytest_cache .ruff_cache
