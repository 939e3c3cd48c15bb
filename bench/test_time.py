"""The test suite's wall time with each database started from the session's template, as a ratio to the same
tests building every database from the migrations (the way before the templates).

    .venv/bin/python bench/test_time.py [REPEATS] [PYTEST ARGS...]   # default 1 round; default the whole suite

Runs ``python -m pytest -q -p no:cacheprovider [ARGS]`` as fresh subprocesses, in turns: once with
``DOTLEDGER_TEST_TEMPLATES=0`` (``tests/conftest.py`` then runs the alembic upgrade and the catalogue sync
for every test's database, on SQLite and PostgreSQL alike), once with the templates (a copied SQLite file,
a pooled PostgreSQL schema reset from the template). The same tests run both ways and must pass both ways.
Prints the medians and their ratio (the goal: at most 0.5). No absolute time is asserted.

A round of the whole suite takes as long as the suite twice; give test files for a shorter measure, e.g.
``.venv/bin/python bench/test_time.py 3 tests/test_waste.py tests/test_ledger.py``.
"""

from __future__ import annotations

import os
import sys

from subprocess_runs import PYTHON, interleaved_medians


def main(repeats: int, args: list[str]) -> None:
    command = [PYTHON, "-m", "pytest", "-q", "-p", "no:cacheprovider", *args]
    env = dict(os.environ)
    runs = {"tests, a database per test from the migrations": command,
            "tests, a database per test from the template": command}
    envs = {"tests, a database per test from the migrations": {**env, "DOTLEDGER_TEST_TEMPLATES": "0"},
            "tests, a database per test from the template": {**env, "DOTLEDGER_TEST_TEMPLATES": "1"}}
    medians = interleaved_medians(runs, envs, repeats, warm=False)
    before, after = medians["tests, a database per test from the migrations"], medians[
        "tests, a database per test from the template"]
    shown = " ".join(args) or "the whole suite"
    print(f"ratio test time from the template / from the migrations ({shown}): {after / before:.2f}"
          f"   (.venv/bin/python bench/test_time.py {repeats} {' '.join(args)})".rstrip())


if __name__ == "__main__":
    rounds = int(sys.argv[1]) if len(sys.argv) > 1 and sys.argv[1].isdigit() else 1
    main(rounds, sys.argv[2:] if len(sys.argv) > 1 and sys.argv[1].isdigit() else sys.argv[1:])
