# sightaudit: two commands do everything (see README.md).
#   make demo   create .venv, install, run the audit on the bundled sample (out/demo/)
#   make test   create/update .venv with the test extra, run the test suite
#   make screenshots   PNGs of the outputs under out/screenshots/, for a reviewer

PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
PIP    := $(BIN)/python -m pip --disable-pip-version-check -q

.PHONY: demo test bench bench-accuracy bench-realistic screenshots clean

$(BIN)/python:
	$(PYTHON) -m venv $(VENV)

$(VENV)/.installed: pyproject.toml | $(BIN)/python
	$(PIP) install -e .
	@touch $@

$(VENV)/.installed-test: pyproject.toml | $(BIN)/python
	$(PIP) install -e '.[test]'
	@touch $@ $(VENV)/.installed

demo: $(VENV)/.installed
	$(BIN)/sightaudit demo --out out/demo

test: $(VENV)/.installed-test
	$(BIN)/python -m pytest -q -n auto --dist loadfile

bench: $(VENV)/.installed
	$(BIN)/python benchmarks/throughput.py --readme
	$(BIN)/python benchmarks/sight3d_speed.py

bench-accuracy: $(VENV)/.installed
	$(BIN)/python benchmarks/alignment_accuracy.py

bench-realistic: $(VENV)/.installed
	$(BIN)/python benchmarks/realistic.py

# pictures of the report, the workbook's Summary and a field sheet, under out/screenshots/
screenshots: $(VENV)/.installed
	$(BIN)/python .ci/screenshots.py

clean:
	rm -rf out .pytest_cache .hypothesis
