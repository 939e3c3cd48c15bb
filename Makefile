# The two quick-start commands: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin

.PHONY: demo test venv clean

# A virtual environment with dotledger and its test dependencies, rebuilt when pyproject.toml changes.
$(VENV)/.installed: pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --disable-pip-version-check -e '.[test]'
	touch $@

venv: $(VENV)/.installed

# Set up, create the SQLite database with the demo scenario, serve on http://127.0.0.1:8000
demo: venv
	$(BIN)/dotledger demo
	DOTLEDGER_SITE_NAME="Northgate Institute of Materials" $(BIN)/dotledger serve --host 127.0.0.1 --port 8000

# Set up and run the whole test suite
test: venv
	$(BIN)/python -m pytest

clean:
	rm -rf $(VENV) instance .pytest_cache
