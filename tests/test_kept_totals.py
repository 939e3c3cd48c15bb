"""The monthly totals kept with every record equal a full recount of the records, and the reports read
from them answer exactly what the records give.

The reference here is computed from the records alone, independently of ``store.month_totals``: the
waste and ledger sums are added up in Python over every stored row, the waste report is a pandas
group-by over the element rows, and the element ledger is checked against the way it was summed
before the totals existed (every record of the months, in SQL and Python; kept below as ``_raw_*``).
The records come from a worked month (``tests/test_site_ledger.py``), a seeded random mix of
entries, reversals, runs with draws, outputs and losses, disposals and shipments through the API,
entries written straight through the ORM into past months, and records moved into other months
afterwards; then the site goes through ``dotledger backup`` and ``restore`` and keeps working.
"""

from __future__ import annotations

import datetime as dt
import random
from collections import defaultdict
from decimal import Decimal

import pandas as pd
import pytest
from alembic import command
from sqlalchemy import BigInteger, cast, func, select
from sqlalchemy.orm import Session

from service.balance.site import MonthFlows, months_between, site_ledger
from service.store import backup, element_ledger, ledger, month_totals
from service.store.db import make_engine, make_sessionmaker, session_scope, upgrade
from service.store.models import (
    HoldingChange,
    Lab,
    LedgerMonthTotal,
    Run,
    RunDraw,
    RunLoss,
    RunOutput,
    StockMovement,
    WasteContainer,
    WasteEntry,
    WasteEntryElement,
    WasteMonthTotal,
)
from tests.conftest import Api, make_app, make_user, http_post, threads_against_server
from tests.test_backup import empty_target  # noqa: F401 - a fixture
from tests.test_site_ledger import _approve, _entry, _work_the_month, month  # noqa: F401 - month is a fixture

UTC = dt.timezone.utc
TOLERANCE = Decimal("0.05")


def _month(at: dt.datetime) -> str:
    return at.astimezone(UTC).strftime("%Y-%m")


# --- the reference: every record, summed here --------------------------------------------------


def _json_records(session: Session) -> list[tuple[str, dt.datetime, dict]]:
    """(flow, time, element masses) of every run draw (at its run's start), output, loss and shipment."""
    started = {run.id: run.started_at for run in session.scalars(select(Run))}
    records = [("run_draw", started[d.run_id], d.element_mass_ug) for d in session.scalars(select(RunDraw))]
    records += [("run_output", o.at, o.element_mass_ug) for o in session.scalars(select(RunOutput))]
    records += [("run_loss", loss.at, loss.element_mass_ug) for loss in session.scalars(select(RunLoss))]
    return records + [("shipment", m.at, m.element_mass_ug) for m in session.scalars(select(StockMovement))
                      if m.kind == "ship"]


def _records(session: Session) -> tuple[dict, dict]:
    """({(month, container, element): [net µg, disposed µg]}, {(month, element, flow): µg}) over every record."""
    disposals = {m.waste_entry_id for m in session.scalars(select(StockMovement)) if m.waste_entry_id}
    waste: dict = defaultdict(lambda: [0, 0])
    for entry in session.scalars(select(WasteEntry)):
        for row in entry.elements:
            key = (_month(entry.at), entry.container_id, row.element)
            waste[key][0] += row.mass_ug
            waste[key][1] += row.mass_ug if entry.id in disposals else 0
    flows: dict = defaultdict(int)
    for change in session.scalars(select(HoldingChange)):
        flows[(_month(change.at), change.element, f"holding:{change.kind}")] += change.mass_ug
    for flow, at, masses in _json_records(session):
        for element, ug in masses.items():
            if ug:
                flows[(_month(at), element, flow)] += ug
    return {k: tuple(v) for k, v in waste.items()}, dict(flows)


def _kept(session: Session) -> tuple[dict, dict]:
    waste = {(r.month, r.container_id, r.element): (r.mass_ug, r.disposed_ug)
             for r in session.scalars(select(WasteMonthTotal))}
    flows = {(r.month, r.element, r.flow): r.mass_ug for r in session.scalars(select(LedgerMonthTotal))}
    return waste, flows


def _waste_rows(session: Session) -> pd.DataFrame:
    rows = session.execute(
        select(WasteEntryElement.element, WasteContainer.stream, Lab.code, WasteContainer.label, WasteEntry.at,
               WasteEntryElement.mass_ug, WasteContainer.lab_id)
        .join(WasteEntry, WasteEntry.id == WasteEntryElement.entry_id)
        .join(WasteContainer, WasteContainer.id == WasteEntry.container_id)
        .join(Lab, Lab.id == WasteContainer.lab_id)).all()
    frame = pd.DataFrame.from_records(rows, columns=["element", "stream", "lab", "container", "at", "mass_ug",
                                                     "lab_id"])
    frame["month"] = frame["at"].map(_month)
    return frame


def _waste_expected(frame: pd.DataFrame, by, start=None, end=None, lab_ids=None, element=None) -> list[tuple]:
    if start is not None:
        frame = frame[frame["at"] >= start]
    if end is not None:
        frame = frame[frame["at"] < end]
    if lab_ids is not None:
        frame = frame[frame["lab_id"].isin(lab_ids)]
    if element is not None:
        frame = frame[frame["element"] == element]
    summed = frame.groupby(list(by), sort=True)["mass_ug"].sum()
    return [(*(key if isinstance(key, tuple) else (key,)), int(ug)) for key, ug in summed.items()]


def _raw_opening(session: Session, before: dt.datetime, elements) -> dict[str, int]:
    """The element ledger's opening as it was summed before the totals: over every holding change."""
    query = (select(HoldingChange.element, cast(func.sum(HoldingChange.mass_ug), BigInteger))
             .where(HoldingChange.at < before, HoldingChange.element.in_(elements)).group_by(HoldingChange.element))
    return {element: int(ug) for element, ug in session.execute(query)}


def _raw_flows(session: Session, start: dt.datetime, end: dt.datetime, elements) -> list[MonthFlows]:
    """The element ledger's month figures as they were summed before the totals: from every record."""
    flows: dict = defaultdict(lambda: defaultdict(int))
    for change in session.scalars(select(HoldingChange).where(HoldingChange.at >= start, HoldingChange.at < end,
                                                               HoldingChange.element.in_(elements))):
        figures = flows[(change.element, _month(change.at))]
        figures["holdings_change_ug"] += change.mass_ug
        if change.kind in element_ledger.RECEIVED:
            figures["received_ug"] += change.mass_ug
        elif change.kind == "product":
            figures["products_kept_ug"] += change.mass_ug
        elif change.kind in element_ledger.CORRECTIONS:
            figures["corrections_ug"] -= change.mass_ug
    disposals = {m.waste_entry_id for m in session.scalars(select(StockMovement)) if m.waste_entry_id}
    for entry in session.scalars(select(WasteEntry).where(WasteEntry.at >= start, WasteEntry.at < end)):
        for row in entry.elements:
            if row.element in elements:
                flows[(row.element, _month(entry.at))]["waste_ug"] += row.mass_ug
                if entry.id in disposals:
                    flows[(row.element, _month(entry.at))]["disposed_ug"] += row.mass_ug
    fields = {"run_draw": "drawn_ug", "run_output": "outputs_ug", "run_loss": "losses_ug", "shipment": "shipped_ug"}
    for flow, at, masses in _json_records(session):
        if start <= at < end:
            for element, ug in masses.items():
                if element in elements and ug:
                    flows[(element, _month(at))][fields[flow]] += ug
    return [MonthFlows(month=m, element=e, **values) for (e, m), values in flows.items()]


def _raw_ledger(session: Session, first: str, last: str, element=None):
    months = months_between(first, last)
    elements = (element,) if element else element_ledger.vocab.TRACKED_ELEMENTS
    start, _ = element_ledger.month_bounds(months[0])
    _, end = element_ledger.month_bounds(months[-1])
    lines = site_ledger(_raw_flows(session, start, end, elements), months, _raw_opening(session, start, elements),
                        TOLERANCE)
    return lines if element else [line for line in lines if element_ledger._occurs(line)]


def _check(sessions) -> int:
    """Kept totals = the records' sums = ``month_totals.recount``; the reports = their raw computation.
    Returns how many months the records span (so a caller can see the mix covered several)."""
    with session_scope(sessions, write=False) as session:
        kept, records = _kept(session), _records(session)
        assert kept[0] == records[0]
        assert kept[1] == records[1]
        recounted = month_totals.recount(session.connection())
        assert recounted == records
        months = sorted({k[0] for k in records[0]} | {k[0] for k in records[1]})

        frame = _waste_rows(session)
        labs = sorted(set(frame["lab_id"]))
        first = month_totals.month_start(months[0])
        middle = month_totals.month_start(months[len(months) // 2])
        day = dt.timedelta(days=1)
        ranges = [
            (None, None),
            (first.date() + 9 * day, None),  # from the 10th of the first month
            (None, middle.date() + 13 * day),  # until the 14th of a middle month, inclusive
            (first.date(), month_totals.next_month(middle).date() - day),  # whole months exactly
            (middle.date() + 2 * day, middle.date() + 20 * day),  # within one month
            (middle.date() - 3 * day, middle.date() + 3 * day),  # across a month's turn
            (first + dt.timedelta(hours=30), middle + dt.timedelta(minutes=90)),  # datetimes: until is exclusive
        ]
        groupings = [("element", "stream", "month"), ("container",), ("lab", "element"), ("month",),
                     ("element", "container", "month", "lab", "stream")]
        for since, until in ranges:
            start = None if since is None else (since if isinstance(since, dt.datetime)
                                                else dt.datetime.combine(since, dt.time(), UTC))
            end = None if until is None else (until if isinstance(until, dt.datetime)
                                              else dt.datetime.combine(until + day, dt.time(), UTC))
            for by in groupings:
                for lab_ids, element in ((None, None), (labs[:1], None), (None, "Cd")):
                    got = ledger.waste_by(session, by, since=since, until=until, lab_ids=lab_ids, element=element)
                    rows = [tuple(r) for r in got.drop(columns="mass_mg").itertuples(index=False)]
                    assert rows == _waste_expected(frame, by, start, end, lab_ids, element), (by, since, until)

        last = months[-1]
        for first_month in {months[0], months[len(months) // 2], last}:
            if first_month > last:
                continue
            for element in (None, "Cd", "Se"):
                kept_lines = element_ledger.ledger_lines(session, since=first_month, until=last, element=element,
                                                         tolerance=TOLERANCE)
                assert kept_lines == _raw_ledger(session, first_month, last, element), (first_month, element)
        return len(months)


# --- a random mix of records ---------------------------------------------------------------------


def _mix(ctx, sessions, rng: random.Random, steps: int) -> None:
    """``steps`` random records through the API and the ORM, some moved into other months afterwards."""
    r, manager, s = ctx["researcher"], ctx["manager"], ctx["stocks"]
    proc = _approve(ctx, "small CdSe batch", [{"stock_id": s["CdO"]["id"], "amount": "2 mg"},
                                              {"stock_id": s["Se"]["id"], "amount": "1 mg"}])
    entries: list[tuple[str, int]] = []
    for _ in range(steps):
        action = rng.choice(["entry", "entry", "reverse", "run", "ship", "dispose", "orm", "move"])
        if action == "entry":
            body = _entry(ctx, "liquid", None, "rinse", [{"element": "Cd", "mass": f"{rng.randint(1, 900)} ug"},
                                                         {"element": "Se", "mass": f"{rng.randint(1, 900)} ug"}],
                          volume="5 mL")
            entries.append(("liquid", body["id"]))
        elif action == "reverse" and entries:
            box, ident = entries.pop(rng.randrange(len(entries)))
            r.call("POST", f"/waste_containers/{ctx[box]}/entries/{ident}/reverse", {"reason": "wrong container"}, 201)
        elif action == "run":
            run = r.call("POST", "/runs", {"procedure_id": proc}, 201)
            r.call("POST", f"/runs/{run['id']}/outputs", {"label": "cores", "method": "measured", "elements": [
                {"element": "Cd", "mass": f"{rng.randint(100, 900)} ug"}]}, 201)
            if rng.random() < 0.5:
                r.call("POST", f"/runs/{run['id']}/losses", {"description": "spilt drop", "elements": [
                    {"element": "Se", "mass": f"{rng.randint(1, 50)} ug"}]}, 201)
        elif action == "ship":
            manager.call("POST", f"/stocks/{s['Se']['id']}/ship", {"destination": "partner lab",
                                                                   "amount": f"{rng.randint(1, 5)} mg"}, 201)
        elif action == "dispose":
            manager.call("POST", f"/stocks/{s['CdO']['id']}/dispose", {
                "container_id": ctx["solid"], "amount": f"{rng.randint(1, 5)} mg", "description": "spoilt"}, 201)
        elif action == "orm":  # written straight through the ORM, into a past month (as the seeding in tests does)
            with session_scope(sessions) as session:
                session.info["actor"] = {"user_id": None, "label": "test:kept_totals"}
                at = dt.datetime.now(UTC) - dt.timedelta(days=rng.randint(20, 400), minutes=rng.randint(0, 1440))
                session.add(WasteEntry(container_id=ctx["liquid"], description="older rinse", volume_ul=1000, at=at,
                                       elements=[WasteEntryElement(element="Cd", mass_ug=rng.randint(-50, 500))]))
        elif action == "move":
            _move_records(sessions, rng)


def _move_records(sessions, rng: random.Random) -> None:
    """Move a few records of each kind into an earlier month through the ORM (as a repair would)."""
    with session_scope(sessions) as session:
        session.info["actor"] = {"user_id": None, "label": "test:kept_totals"}
        for model, column in ((WasteEntry, "at"), (HoldingChange, "at"), (Run, "started_at"), (RunOutput, "at"),
                              (RunLoss, "at"), (StockMovement, "at")):
            rows = session.scalars(select(model).order_by(model.id)).all()
            for row in rng.sample(rows, min(2, len(rows))):
                setattr(row, column, getattr(row, column) - dt.timedelta(days=rng.randint(25, 200)))
        changes = session.scalars(select(HoldingChange).order_by(HoldingChange.id)).all()
        if changes:  # a changed amount, not only a changed time
            rng.choice(changes).mass_ug += 1


@pytest.mark.parametrize("seed", [17, 2026])
def test_kept_totals_equal_a_recount_through_a_random_mix_and_a_restore(app, month, seed, database_url, empty_target,
                                                                       tmp_path, rules_dir):
    sessions = app.extensions["dotledger.sessions"]
    _work_the_month(month)
    _check(sessions)
    _mix(month, sessions, random.Random(seed), 40)
    assert _check(sessions) >= 3  # the mix spans several months

    # Through a backup and a restore the totals stay those of the records, and keep up afterwards.
    path = tmp_path / "site.backup"
    backup.backup(database_url, path)
    assert backup.restore(path, empty_target).ok
    restored = make_app(empty_target, rules_dir)
    try:
        restored_sessions = restored.extensions["dotledger.sessions"]
        _check(restored_sessions)
        admin = Api(restored.test_client(), make_user(restored, "after@test.example", "admin"))
        again = admin.call("POST", f"/waste_containers/{month['liquid']}/entries", {
            "description": "after the restore", "volume": "5 mL", "elements": [{"element": "Cd", "mass": "77 ug"}]}, 201)
        admin.call("POST", f"/waste_containers/{month['liquid']}/entries/{again['id']}/reverse", {"reason": "test reversal"}, 201)
        admin.call("POST", f"/stocks/{month['stocks']['Se']['id']}/ship", {"destination": "x", "amount": "1 mg"}, 201)
        _check(restored_sessions)
    finally:
        restored.extensions["dotledger.engine"].dispose()


def test_a_rebuild_and_the_migration_fill_the_totals_from_the_records(app, month, database_url):
    """The totals of a database upgraded past the revision that adds them are the records' sums."""
    sessions = app.extensions["dotledger.sessions"]
    _work_the_month(month)
    _mix(month, sessions, random.Random(5), 15)
    with session_scope(sessions) as session:  # emptied, then rebuilt from the records
        session.execute(WasteMonthTotal.__table__.delete())
        session.execute(LedgerMonthTotal.__table__.delete())
        month_totals.rebuild(session.connection())
    _check(sessions)
    app.extensions["dotledger.engine"].dispose()

    from service.store.db import MIGRATIONS
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", database_url.replace("%", "%%"))
    command.downgrade(config, "0019_holding_changes")
    upgrade(database_url)
    engine = make_engine(database_url)
    try:
        _check(make_sessionmaker(engine))
    finally:
        engine.dispose()


def test_an_empty_site_reports_nothing(app):
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        assert ledger.waste_by(session, ["element", "month"]).empty
        assert ledger.waste_by(session, ["element"], since=dt.date(2026, 1, 5), until=dt.date(2026, 3, 2)).empty
        assert month_totals.recount(session.connection()) == ({}, {})
        assert element_ledger.ledger_lines(session, since="2026-01", until="2026-02", tolerance=TOLERANCE) == []


def test_concurrent_writers_lose_no_total(app, month):
    """Eight threads over real HTTP add entries to two containers and ship from one stock at once: every
    thread adds to the same month's rows (same container, element, flow), so a lost update would show."""
    _work_the_month(month)
    token = month["manager"].token
    answers: list[int] = []

    def post(port: int, path: str, body: dict) -> None:
        answers.append(http_post(port, path, body, token))

    def worker(port: int, n: int) -> None:
        for k in range(3):
            post(port, f"/waste_containers/{month['liquid' if (n + k) % 2 else 'solid']}/entries", {
                "description": f"rinse {n}.{k}", **({"volume": "2 mL"} if (n + k) % 2 else {"mass": "2 g"}),
                "elements": [{"element": "Cd", "mass": f"{n + 1}{k} ug"}, {"element": "Se", "mass": "1 ug"}]})
        post(port, f"/stocks/{month['stocks']['Se']['id']}/ship", {"destination": f"partner {n}", "amount": "1 mg"})

    threads_against_server(app, worker, 8, timeout=240)
    assert answers == [201] * 32
    sessions = app.extensions["dotledger.sessions"]
    _check(sessions)
    with session_scope(sessions, write=False) as session:  # Σ over n < 8, k < 3 of the number "{n+1}{k}" µg
        this = _month(dt.datetime.now(UTC))
        added = sum(int(f"{n + 1}{k}") for n in range(8) for k in range(3))
        assert added == 3 * 10 * 36 + 8 * 3  # 10 × (n + 1) + k: 10 × 3 × 36 + 8 × (0 + 1 + 2)
        cd = session.scalars(select(WasteEntryElement.mass_ug).join(WasteEntry).where(
            WasteEntry.description.like("rinse %"), WasteEntryElement.element == "Cd")).all()
        assert sum(cd) == added
        kept = _kept(session)[1]
        # 1 mg of selenium (100 %) = 1 000 µg Se per thread, and the 3 000 µg of the cores the worked month shipped
        assert kept[(this, "Se", "shipment")] == 8 * 1000 + 3_000


def test_totals_are_kept_for_a_factory_the_event_registry_takes_for_another(app, monkeypatch):
    # SQLAlchemy's event.contains() answers by id(): a new session factory that takes the id of a collected
    # one looks "installed" to it, and an install that asked it would leave the new factory's sessions writing
    # records without their totals (reports then missed them, depending on memory reuse). Answer "yes"
    # always, as it does after such a reuse: the totals must still be kept.
    from sqlalchemy import event

    from service.store.models import Location

    monkeypatch.setattr(event, "contains", lambda *args, **kwargs: True)
    factory = make_sessionmaker(app.extensions["dotledger.engine"])
    with session_scope(factory) as session:
        session.info["actor"] = {"user_id": None, "label": "test:kept-totals"}
        lab = Lab(code="K-1", name="Lab K-1")
        session.add(lab)
        session.flush()
        place = Location(lab_id=lab.id, building="K", room="K-1", storage="SAA", kind="satellite_accumulation_area")
        session.add(place)
        session.flush()
        box = WasteContainer(label="K-W1", lab_id=lab.id, location_id=place.id, stream="aqueous_heavy_metals",
                             form="liquid", capacity_text="20 L", capacity_micro=20_000_000)
        session.add(box)
        session.flush()
        session.add(WasteEntry(container_id=box.id, description="wash", volume_ul=50_000,
                               at=dt.datetime(2026, 3, 5, 10, 0, tzinfo=UTC),
                               elements=[WasteEntryElement(element="Cd", mass_ug=1234)]))
    with session_scope(factory, write=False) as session:
        kept = {(row.month, row.element, row.mass_ug) for row in session.scalars(select(WasteMonthTotal))}
    assert kept == {("2026-03", "Cd", 1234)}  # the one entry, by hand
