"""Time a read command of the command line against bare scripts that run the same queries.

    .venv/bin/python bench/cli_start.py [REPEATS]      # interleaved repetitions, default 15

Makes the demo database in a temporary folder (``dotledger demo``), then runs, each as a fresh
subprocess and interleaved so that a change in the machine's load hits all alike:

- ``dotledger audit-verify`` (start the application, read the audit head and every audit event in
  id order, recompute the hash chain);
- a bare SQLAlchemy script opening the same SQLite file and running the same two SELECTs;
- the same with the standard library's sqlite3 (what Python itself costs to start and query).

Prints the medians and each ratio of the command to a bare script. No absolute time is asserted.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

from subprocess_runs import DOTLEDGER, PYTHON, ROOT, interleaved_medians

BARE_SQLALCHEMY = """
import sys
from sqlalchemy import create_engine, text
engine = create_engine(f"sqlite:///{sys.argv[1]}")
with engine.connect() as conn:
    head = conn.execute(text("SELECT last_event_id, last_hash FROM audit_head WHERE id = 1")).one()
    rows = conn.execute(text("SELECT * FROM audit_events WHERE id > 0 AND id <= :last ORDER BY id LIMIT 1000"),
                        {"last": head.last_event_id}).all()
print(f"{len(rows)} events; head hash {head.last_hash}")
"""

BARE_SQLITE3 = """
import sqlite3, sys
conn = sqlite3.connect(sys.argv[1])
last, digest = conn.execute("SELECT last_event_id, last_hash FROM audit_head WHERE id = 1").fetchone()
rows = conn.execute("SELECT * FROM audit_events WHERE id > 0 AND id <= ? ORDER BY id LIMIT 1000", (last,)).fetchall()
print(f"{len(rows)} events; head hash {digest}")
"""


def main(repeats: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        database = Path(folder) / "demo.sqlite"
        env = {**os.environ, "DOTLEDGER_DATABASE_URL": f"sqlite:///{database}"}
        subprocess.run([*DOTLEDGER, "demo"], env=env, cwd=ROOT, check=True, stdout=subprocess.DEVNULL)
        runs = {"dotledger audit-verify": [*DOTLEDGER, "audit-verify"],
                "bare SQLAlchemy script": [PYTHON, "-c", BARE_SQLALCHEMY, str(database)],
                "bare sqlite3 script": [PYTHON, "-c", BARE_SQLITE3, str(database)]}
        medians = interleaved_medians(runs, env, repeats)
    command = medians["dotledger audit-verify"]
    print(f"ratio dotledger audit-verify / bare SQLAlchemy script: {command / medians['bare SQLAlchemy script']:.2f}"
          f"   (.venv/bin/python bench/cli_start.py {repeats})")
    print(f"ratio dotledger audit-verify / bare sqlite3 script:    {command / medians['bare sqlite3 script']:.2f}"
          f"   (.venv/bin/python bench/cli_start.py {repeats})")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 15)
