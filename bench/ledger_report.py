"""Time ``ledger.waste_by(["element", "stream", "month"])`` over N waste entries on SQLite.

    .venv/bin/python bench/ledger_report.py [N]      # N entries, default 200000

Fills a fresh SQLite database (alembic schema, bulk inserts; 1-3 element rows per entry,
about 2 per entry; the monthly totals the report reads then rebuilt from them) and prints the report's time as a ratio to baselines measured in the
same run: a plain ``SELECT COUNT(*)`` over the element rows, and a scan of the same join.
A reference run fetches every row and groups in pandas instead (what SQL aggregation saves).
No absolute times are asserted; the ratios show what the grouping adds over a scan.
"""

from __future__ import annotations

import datetime as dt
import random
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd
from sqlalchemy import func, insert, select
from sqlalchemy.orm import Session

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from service.store import ledger, month_totals  # noqa: E402
from service.store.db import make_engine, upgrade  # noqa: E402
from service.vocab import STREAMS  # noqa: E402
from service.store.models import (  # noqa: E402
    Lab,
    Location,
    WasteContainer,
    WasteEntry,
    WasteEntryElement,
)

BATCH = 20_000
ELEMENTS = ("Cd", "Se", "Pb", "Zn", "Te")


def fill(session: Session, entries: int, seed: int = 7) -> int:
    """``entries`` waste entries over 4 labs × 5 streams and 24 months; returns element rows."""
    rng = random.Random(seed)
    now = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    session.execute(insert(Lab), [{"id": i, "code": f"L-{i}", "name": f"Lab {i}", "created_at": now, "updated_at": now}
                                  for i in range(1, 5)])
    session.execute(insert(Location), [{"id": i, "lab_id": i, "building": "B", "room": f"R-{i}", "storage": "SAA",
                                        "kind": "satellite_accumulation_area", "created_at": now, "updated_at": now}
                                       for i in range(1, 5)])
    boxes = [{"id": n + 1, "label": f"W-{n + 1}", "lab_id": n % 4 + 1, "location_id": n % 4 + 1,
              "stream": STREAMS[n % len(STREAMS)], "form": "liquid", "capacity_text": "20 L",
              "capacity_micro": 20_000_000, "acute_hazardous": False, "state": "open", "created_at": now,
              "updated_at": now} for n in range(40)]
    session.execute(insert(WasteContainer), boxes)
    element_rows = 0
    start = dt.datetime(2025, 1, 1, tzinfo=dt.timezone.utc)
    for first in range(1, entries + 1, BATCH):
        ids = range(first, min(first + BATCH, entries + 1))
        session.execute(insert(WasteEntry), [
            {"id": i, "container_id": rng.randrange(1, 41), "description": "bench", "volume_ul": 10_000, "mass_ug": 0,
             "at": start + dt.timedelta(minutes=rng.randrange(0, 730 * 24 * 60))} for i in ids])
        rows = [{"entry_id": i, "element": s, "mass_ug": rng.randrange(-500, 50_000)}
                for i in ids for s in rng.sample(ELEMENTS, rng.randint(1, 3))]
        session.execute(insert(WasteEntryElement), rows)
        element_rows += len(rows)
    month_totals.rebuild(session.connection())  # the monthly totals the report reads, from the bulk rows
    session.commit()
    return element_rows


def _in_python(session: Session):
    """What the report would cost without SQL aggregation: every element row into pandas."""
    rows = session.execute(
        select(WasteEntryElement.element, WasteContainer.stream, WasteEntry.at, WasteEntryElement.mass_ug)
        .join(WasteEntry, WasteEntry.id == WasteEntryElement.entry_id)
        .join(WasteContainer, WasteContainer.id == WasteEntry.container_id)).all()
    frame = pd.DataFrame.from_records(rows, columns=["element", "stream", "at", "mass_ug"])
    frame["month"] = frame["at"].map(lambda at: at.strftime("%Y-%m"))
    return frame.groupby(["element", "stream", "month"])["mass_ug"].sum()


def best_of(repeats: int, work) -> float:
    times = []
    for _ in range(repeats):
        started = time.perf_counter()
        work()
        times.append(time.perf_counter() - started)
    return min(times)


def main(entries: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        url = f"sqlite:///{Path(folder) / 'bench.sqlite'}"
        upgrade(url)
        engine = make_engine(url)
        with Session(engine) as session:
            started = time.perf_counter()
            element_rows = fill(session, entries)
            took = time.perf_counter() - started
            print(f"filled {entries:,} entries / {element_rows:,} element rows in {took:.1f} s")
            count = best_of(5, lambda: session.scalar(select(func.count()).select_from(WasteEntryElement)))
            scan = best_of(5, lambda: session.scalar(
                select(func.count(WasteEntry.at)).select_from(WasteEntryElement)
                .join(WasteEntry, WasteEntry.id == WasteEntryElement.entry_id)))
            fetch = best_of(1, lambda: _in_python(session))
            frame = ledger.waste_by(session, ["element", "stream", "month"])
            report = best_of(5, lambda: ledger.waste_by(session, ["element", "stream", "month"]))
        engine.dispose()
    print(f"report rows: {len(frame)}; net total {int(frame['mass_ug'].sum()):,} µg")
    print(f"baseline COUNT(*) over waste_entry_elements: {count * 1000:.1f} ms")
    print(f"baseline scan of the element-entry join:    {scan * 1000:.1f} ms")
    print(f"waste_by(element, stream, month):           {report * 1000:.1f} ms")
    print(f"reference: every row fetched, grouped in pandas: {fetch * 1000:.1f} ms")
    print(f"ratio report / COUNT(*): {report / count:.1f}   ratio report / join scan: {report / scan:.1f}   "
          f"ratio report / fetch-all: {report / fetch:.2f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200_000)
