# The two quick-start commands: `make demo` and `make test`.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
LOCK   := requirements/lock.txt
PIP    := $(BIN)/pip install --quiet --disable-pip-version-check

.PHONY: demo test venv system-run system-test lock lock-upgrade _compile clean

# Operating-system packages (Pango, HarfBuzz-subset, DejaVu fonts, venv; Chromium for the tests):
# installed with apt-get when run as root, else one line names what to install.
system-run:
	@PYTHON=$(PYTHON) bash requirements/system.sh run
system-test:
	@PYTHON=$(PYTHON) bash requirements/system.sh test

# A virtual environment with the exact versions of the lock file (the test extras included),
# then dotledger itself; rebuilt when pyproject.toml or the lock changes. Its modules are compiled
# to bytecode as pip does for an installed package (an editable install is not, and where
# PYTHONDONTWRITEBYTECODE is set each start would compile them again). The last line fails
# when WeasyPrint warns at import (a missing system library).
$(VENV)/.installed: pyproject.toml $(LOCK)
	rm -rf $(VENV)
	$(PYTHON) -m venv $(VENV)
	$(PIP) -r $(LOCK)
	$(PIP) --no-deps --no-build-isolation -e .
	$(BIN)/python -m compileall -q service
	$(BIN)/python -W error -c "import weasyprint"
	touch $@

venv: system-run $(VENV)/.installed

# Set up, create the SQLite database with the demo scenario, serve on http://127.0.0.1:8000
demo: system-run $(VENV)/.installed
	$(BIN)/dotledger demo
	$(BIN)/dotledger serve --host 127.0.0.1 --port 8000

# Set up and run the whole test suite
test: system-test $(VENV)/.installed
	$(BIN)/python -m pytest

# Refresh requirements/lock.txt from pyproject.toml: `make lock` adds and drops packages to match it and
# keeps the other pins; `make lock-upgrade` moves every pin to the newest version within the bounds.
lock:
	$(MAKE) --no-print-directory _compile COMPILE_FLAGS=
lock-upgrade:
	$(MAKE) --no-print-directory _compile COMPILE_FLAGS=--upgrade
_compile:
	$(PYTHON) -m venv $(VENV)-lock
	$(VENV)-lock/bin/pip install --quiet --disable-pip-version-check pip-tools
	CUSTOM_COMPILE_COMMAND="make lock" $(VENV)-lock/bin/pip-compile --quiet $(COMPILE_FLAGS) --strip-extras \
	  --allow-unsafe --all-build-deps --no-emit-index-url --no-emit-find-links \
	  --extra test --extra postgres --extra server -o $(LOCK) pyproject.toml
	rm -rf $(VENV)-lock

clean:
	rm -rf $(VENV) $(VENV)-lock instance .pytest_cache
