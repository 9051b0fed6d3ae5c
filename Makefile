# drivecase: two commands for a fresh machine (see README.md).
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
CASE   ?= data/demo
PORT   ?= 8050

.PHONY: demo test venv venv-test check run bench clean

$(BIN)/activate:
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip

# Runtime environment (editable install: the tool reads its data/ folder in place).
$(VENV)/.installed: pyproject.toml | $(BIN)/activate
	$(BIN)/pip install --quiet -e .
	touch $@

# Environment with the test extras.
$(VENV)/.installed-test: pyproject.toml | $(BIN)/activate
	$(BIN)/pip install --quiet -e ".[test,scale]"
	touch $@ $(VENV)/.installed

venv: $(VENV)/.installed
venv-test: $(VENV)/.installed-test

# Check the demo case, run the whole analysis into out/demo, then open the dashboard on it.
demo: $(VENV)/.installed
	$(BIN)/drivecase check $(CASE)
	$(BIN)/drivecase run $(CASE) --out out/demo
	$(BIN)/drivecase serve $(CASE) --port $(PORT)

test: $(VENV)/.installed-test
	$(BIN)/python -m pytest

check: $(VENV)/.installed
	$(BIN)/drivecase check $(CASE)

# Fleet-size benchmark (not part of the tests); writes its figures to docs/performance.md.
bench: $(VENV)/.installed-test
	$(BIN)/python benchmarks/bench_fleet.py

clean:
	rm -rf $(VENV) .pytest_cache build *.egg-info
