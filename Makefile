# Set-up and everyday commands. Only python3 and make are needed on a fresh machine.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin

.PHONY: demo test slow lint bench mutation clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip

# The runtime install; re-run only when pyproject.toml changes.
$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e .
	touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(VENV)/.installed $@

demo: $(VENV)/.installed
	$(BIN)/forcefit demo

test: $(VENV)/.installed-test
	OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1 NUMBA_NUM_THREADS=1 $(BIN)/python -m pytest -q -n auto --dist load

slow: $(VENV)/.installed-test
	$(BIN)/python -m pytest -q -m slow

lint: $(VENV)/.installed-test
	$(BIN)/ruff check forcefit tests benchmarks datasets_demo
	$(BIN)/mypy

bench: $(VENV)/.installed-test
	for b in benchmarks/*.py; do case $$b in */mutation.py|*/validation.py) ;; *) $(BIN)/python $$b || exit 1;; esac; done

# The sampled mutation study of the physics core (DEVELOPERS.md): hours, one core, low priority.
mutation: $(VENV)/.installed-test
	$(BIN)/python -m pip install --quiet -e '.[test,mutation]'
	nice -n 10 $(BIN)/python benchmarks/mutation.py --sample 150 --log mutation.jsonl

clean:
	rm -rf $(VENV) build *.egg-info .pytest_cache
