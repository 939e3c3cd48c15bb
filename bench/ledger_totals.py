"""The waste report and the element ledger from the kept monthly totals, as a ratio to the bare GROUP BY
over the raw rows, at 10^4, 10^5 and 10^6 waste entries.

    .venv/bin/python bench/ledger_totals.py [N ...]      # default 10000 100000 1000000 entries

For each N, fills a fresh SQLite database (alembic schema; rows inserted in bulk with SQL, not through
the API: N waste entries of 1-3 element rows over 40 containers and 24 months, and N holding changes),
fills the monthly totals from them once (``month_totals.rebuild``, what migration 0020 does for an
existing site), then times, interleaved, with medians of REPEATS rounds:

- ``ledger.waste_by(["element", "stream", "month"])`` (the report, as its DataFrame) against the bare
  ``SELECT element, stream, month, SUM(mass_ug) … GROUP BY`` over the element rows joined to their
  entries and containers (the rows fetched, nothing else);
- ``element_ledger.ledger_lines`` over the 24 months against the bare GROUP BY of the holding changes
  and of the waste element rows by element and month (what the ledger summed before the totals).

Prints one line per ratio (goal ≤ 0.1 at 10^6). With DOTLEDGER_BENCH_POSTGRES_URL set the same runs
on PostgreSQL too, in a schema of its own that is dropped afterwards. No absolute time is asserted.
"""

from __future__ import annotations

import datetime as dt
import os
import random
import statistics
import sys
import tempfile
import time
import uuid
from decimal import Decimal
from pathlib import Path

from sqlalchemy import create_engine, insert, text

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from service.store import element_ledger, ledger, month_totals  # noqa: E402
from service.store.db import make_engine, make_sessionmaker, session_scope, upgrade  # noqa: E402
from service.store.models import (  # noqa: E402
    HoldingChange,
    Lab,
    Location,
    WasteContainer,
    WasteEntry,
    WasteEntryElement,
)
from service.vocab import STREAMS  # noqa: E402

SIZES = (10_000, 100_000, 1_000_000)
REPEATS = 7
BATCH = 20_000
ELEMENTS = ("Cd", "Se", "Pb", "Zn", "Te")
START = dt.datetime(2025, 1, 1, tzinfo=dt.timezone.utc)
MINUTES = 730 * 24 * 60  # 24 months


def fill(engine, entries: int, seed: int = 7) -> None:
    """``entries`` waste entries over 4 labs × 40 containers and 24 months, and as many holding changes."""
    rng = random.Random(seed)
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    with engine.begin() as conn:
        conn.execute(insert(Lab), [{"id": i, "code": f"L-{i}", "name": f"Lab {i}", "created_at": now,
                                    "updated_at": now} for i in range(1, 5)])
        conn.execute(insert(Location), [{"id": i, "lab_id": i, "building": "B", "room": f"R-{i}", "storage": "SAA",
                                         "kind": "satellite_accumulation_area", "created_at": now, "updated_at": now}
                                        for i in range(1, 5)])
        conn.execute(insert(WasteContainer), [
            {"id": n + 1, "label": f"W-{n + 1}", "lab_id": n % 4 + 1, "location_id": n % 4 + 1,
             "stream": STREAMS[n % len(STREAMS)], "form": "liquid", "capacity_text": "20 L",
             "capacity_micro": 20_000_000, "acute_hazardous": False, "state": "open", "created_at": now,
             "updated_at": now} for n in range(40)])
        for first in range(1, entries + 1, BATCH):
            ids = range(first, min(first + BATCH, entries + 1))
            conn.execute(insert(WasteEntry), [
                {"id": i, "container_id": rng.randrange(1, 41), "description": "bench", "volume_ul": 10_000,
                 "mass_ug": 0, "at": START + dt.timedelta(minutes=rng.randrange(MINUTES))} for i in ids])
            conn.execute(insert(WasteEntryElement), [
                {"entry_id": i, "element": s, "mass_ug": rng.randrange(-500, 50_000)}
                for i in ids for s in rng.sample(ELEMENTS, rng.randint(1, 3))])
            conn.execute(insert(HoldingChange), [
                {"at": START + dt.timedelta(minutes=rng.randrange(MINUTES)), "element": rng.choice(ELEMENTS),
                 "mass_ug": rng.randrange(-50_000, 60_000), "kind": rng.choice(("received", "drawn_by_run", "shipped")),
                 "lab_id": rng.randrange(1, 5)} for _ in ids])
        month_totals.rebuild(conn)


def _bare_waste(engine):
    dialect = engine.dialect.name
    month = "strftime('%Y-%m', e.at)" if dialect == "sqlite" else "to_char(e.at, 'YYYY-MM')"
    sql = text(f"SELECT x.element, c.stream, {month} AS month, SUM(x.mass_ug) FROM waste_entry_elements x "
               "JOIN waste_entries e ON e.id = x.entry_id JOIN waste_containers c ON c.id = e.container_id "
               f"GROUP BY x.element, c.stream, {month}")

    def run(conn):
        return conn.execute(sql).all()
    return run


def _bare_ledger(engine):
    dialect = engine.dialect.name

    def month(column):
        return f"strftime('%Y-%m', {column})" if dialect == "sqlite" else f"to_char({column}, 'YYYY-MM')"
    held = text(f"SELECT element, {month('at')}, kind, SUM(mass_ug) FROM holding_changes "
                f"GROUP BY element, {month('at')}, kind")
    waste = text(f"SELECT x.element, {month('e.at')}, SUM(x.mass_ug) FROM waste_entry_elements x "
                 f"JOIN waste_entries e ON e.id = x.entry_id GROUP BY x.element, {month('e.at')}")

    def run(conn):
        return conn.execute(held).all() + conn.execute(waste).all()
    return run


def measure(url: str, entries: int, repeats: int) -> dict[str, float]:
    """{name: median seconds} of the four calls on a database at ``url`` holding ``entries`` entries."""
    upgrade(url)
    engine = make_engine(url)
    started = time.perf_counter()
    fill(engine, entries)
    print(f"  filled {entries:,} entries in {time.perf_counter() - started:.1f} s", flush=True)
    sessions = make_sessionmaker(engine)
    bare_waste, bare_ledger = _bare_waste(engine), _bare_ledger(engine)
    calls = {
        "waste report": lambda s: ledger.waste_by(s, ["element", "stream", "month"]),
        "bare waste GROUP BY": lambda s: bare_waste(s.connection()),
        "element ledger": lambda s: element_ledger.ledger_lines(s, since="2025-01", until="2026-12",
                                                                 tolerance=Decimal("0.05")),
        "bare ledger GROUP BY": lambda s: bare_ledger(s.connection()),
    }
    times: dict[str, list[float]] = {name: [] for name in calls}
    try:
        with session_scope(sessions, write=False) as session:
            for call in calls.values():  # warm the caches once
                call(session)
            for _ in range(repeats):
                for name, call in calls.items():
                    began = time.perf_counter()
                    call(session)
                    times[name].append(time.perf_counter() - began)
    finally:
        engine.dispose()
    return {name: statistics.median(values) for name, values in times.items()}


def report(database: str, entries: int, medians: dict[str, float]) -> None:
    waste = medians["waste report"] / medians["bare waste GROUP BY"]
    held = medians["element ledger"] / medians["bare ledger GROUP BY"]
    command = f".venv/bin/python bench/ledger_totals.py {entries}"
    print(f"{database} {entries:>9,} entries: waste report / bare GROUP BY = {waste:.3f} "
          f"({medians['waste report'] * 1000:.1f} ms vs {medians['bare waste GROUP BY'] * 1000:.1f} ms)   [{command}]")
    print(f"{database} {entries:>9,} entries: element ledger / bare GROUP BY = {held:.3f} "
          f"({medians['element ledger'] * 1000:.1f} ms vs {medians['bare ledger GROUP BY'] * 1000:.1f} ms)   [{command}]")


def _postgres(base: str, entries: int, repeats: int) -> dict[str, float]:
    admin = create_engine(base)
    schema = f"bench_{uuid.uuid4().hex[:10]}"
    with admin.begin() as conn:
        conn.execute(text(f'CREATE SCHEMA "{schema}"'))
    try:
        separator = "&" if "?" in base else "?"
        return measure(f"{base}{separator}options=-csearch_path%3D{schema}", entries, repeats)
    finally:
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        admin.dispose()


def main(sizes: tuple[int, ...]) -> None:
    postgres = os.environ.get("DOTLEDGER_BENCH_POSTGRES_URL")
    print(f"median of {REPEATS} interleaved rounds; ratio = report from the kept totals / bare GROUP BY over "
          "the raw rows (goal ≤ 0.1 at 10^6)")
    for entries in sizes:
        with tempfile.TemporaryDirectory() as folder:
            report("SQLite", entries, measure(f"sqlite:///{Path(folder) / 'bench.sqlite'}", entries, REPEATS))
        if postgres:
            report("PostgreSQL", entries, _postgres(postgres, entries, REPEATS))


if __name__ == "__main__":
    main(tuple(int(a) for a in sys.argv[1:]) or SIZES)
