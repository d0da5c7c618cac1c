# Two commands set everything up on a fresh machine that has Python 3.11 and pip:
#   make run    -> .venv with kinroots, then the main job on the embedded default case
#   make test   -> .venv with kinroots[test], then the whole test suite (slow tests included)
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
OUT    ?= kinroots-out

.PHONY: run test lint docs bench validation clean fuzz

$(PY):
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip

$(VENV)/.installed: pyproject.toml | $(PY)
	$(PY) -m pip install -q -e .
	@touch $@

$(VENV)/.installed-test: pyproject.toml | $(PY)
	$(PY) -m pip install -q -e ".[test]"
	@touch $@ $(VENV)/.installed

$(VENV)/.installed-docs: pyproject.toml | $(PY)
	$(PY) -m pip install -q -e ".[docs]"
	@touch $@ $(VENV)/.installed

run: $(VENV)/.installed
	$(VENV)/bin/kinroots solve --default -o $(OUT)

# pytest exits 5 when it collects no test: that must not pass as green.
test: $(VENV)/.installed-test
	@$(PY) -m pytest -n 2 -p no:cacheprovider; rc=$$?; \
	if [ $$rc -eq 5 ]; then echo "make test: pytest collected no tests" >&2; exit 1; fi; \
	exit $$rc

# a longer mutation fuzz of every command than the test suite's (tests/test_fuzz_commands.py)
fuzz: $(VENV)/.installed-test
	KINROOTS_FUZZ_EXAMPLES=$${FUZZ_EXAMPLES:-1000} $(PY) -m pytest -n 2 -p no:cacheprovider \
		tests/test_fuzz_commands.py

lint: $(VENV)/.installed-test
	$(VENV)/bin/ruff check kinroots tests benchmarks
	$(PY) -m mypy kinroots

# the API reference from the docstrings (Sphinx + numpydoc), warnings are errors
docs: $(VENV)/.installed-docs
	$(VENV)/bin/sphinx-build -q -W --keep-going -b html docs/api docs/api/_build

bench: $(VENV)/.installed-test
	@for b in benchmarks/bench_*.py; do echo "== $$b"; $(PY) $$b || exit 1; done

# docs/validation.md and its figures, from the same checks the tests run
validation: $(VENV)/.installed-test
	$(PY) docs/make_validation.py

clean:
	rm -rf $(OUT) build dist docs/api/_build *.egg-info .pytest_cache .ruff_cache .hypothesis
