# Every target sets up its own virtual environment on first use (Python 3.11+).
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed

.PHONY: demo test lint bench reference clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --disable-pip-version-check -e ".[test]"
	touch $(STAMP)

## demo: plan the shipped knee-pain case study; the memo lands in demo-output/knee_pain/memo.html
demo: $(STAMP)
	$(BIN)/assurance plan case_studies/knee_pain/design.toml --out demo-output/knee_pain --overwrite

## test: the whole test suite (unit, reference values, properties, command line, doctests),
## one worker process per core, each test module kept in one worker (its shared plans made once)
test: $(STAMP)
	$(BIN)/python -m pytest -q -n auto --dist loadscope

## lint: ruff over the package, tests and benchmarks
lint: $(STAMP)
	$(BIN)/ruff check assurance tests benchmarks

## bench: speed benchmarks (not part of the tests); figures go to the terminal
bench: $(STAMP)
	$(BIN)/python benchmarks/run.py

## reference: regenerate docs/design-file.md and docs/design-file.schema.json from the schema
reference: $(STAMP)
	$(BIN)/python -m assurance.design_file.reference docs

clean:
	rm -rf $(VENV) demo-output .pytest_cache .hypothesis
