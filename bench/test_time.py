"""The test suite's wall time with its shortcuts, as a ratio to the same tests without them (the way before).

    .venv/bin/python bench/test_time.py [REPEATS] [PYTEST ARGS...]   # default 1 round; default the whole suite

Runs ``python -m pytest -q -p no:cacheprovider [ARGS]`` as fresh subprocesses, in turns: once with
``DOTLEDGER_TEST_SHORTCUTS=0`` (``tests/conftest.py`` then runs the alembic upgrade and the catalogue sync
for every test's database, on SQLite and PostgreSQL alike, and hashes every password at the service's
scrypt cost), once with the shortcuts (each database from the session's template: a copied SQLite file,
a pooled PostgreSQL schema reset from the template; passwords at a low test cost, except in the tests
that check the service's cost). The same tests run both ways and must pass both ways. What the two have
in common is not compared: the application's own start-up (URL builders compiled when first used) is
as fast in both.
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
    without, with_ = "tests without the shortcuts", "tests with the shortcuts"
    runs = {without: command, with_: command}
    envs = {without: {**env, "DOTLEDGER_TEST_SHORTCUTS": "0"}, with_: {**env, "DOTLEDGER_TEST_SHORTCUTS": "1"}}
    medians = interleaved_medians(runs, None, repeats, warm=False, envs=envs)
    before, after = medians[without], medians[with_]
    shown = " ".join(args) or "the whole suite"
    print(f"ratio test time with / without the shortcuts ({shown}): {after / before:.2f}"
          f"   (.venv/bin/python bench/test_time.py {repeats} {' '.join(args)})".rstrip())


if __name__ == "__main__":
    rounds = int(sys.argv[1]) if len(sys.argv) > 1 and sys.argv[1].isdigit() else 1
    main(rounds, sys.argv[2:] if len(sys.argv) > 1 and sys.argv[1].isdigit() else sys.argv[1:])
