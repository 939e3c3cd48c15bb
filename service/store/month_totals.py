"""Monthly totals kept beside the records, so that a ledger report costs what its answer holds.

Two derived tables, written in the transaction of every flush that adds a record they sum (months
are UTC calendar months, 'YYYY-MM'):

- ``waste_month_totals``: per month × waste container × element, the net µg of the waste entries
  (``mass_ug``, reversals negative) and of those that disposed of a stock (``disposed_ug``, counted
  when the disposal's movement names its entry). Stream and lab follow from the container.
- ``ledger_month_totals``: per month × element × flow, the µg of the holding changes
  (flow ``holding:<kind>``) and of run draws (month of the run's start), run outputs, run losses and
  shipments (``run_draw``, ``run_output``, ``run_loss``, ``shipment``).

A flush adds its new records with one UPSERT per table (``INSERT … ON CONFLICT DO UPDATE SET
mass_ug = mass_ug + excluded.mass_ug``, on SQLite and PostgreSQL alike), rows in key order so that
concurrent transactions take the row locks in one order. The records are append-only; a flush that
changes or deletes one (the service never does; a repair or a test may) recomputes the months it
touched from the records instead, and an ORM bulk UPDATE or DELETE of them recounts every month.
Rows written around the ORM session (Core or plain SQL on a connection) bypass this: call
:func:`rebuild` after them. :func:`recount` is the full recomputation from the records.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from typing import Optional

from sqlalchemy import BigInteger, String, and_, case, cast, delete, event, func, literal_column, or_, select
from sqlalchemy.orm import Session, sessionmaker
from sqlalchemy.orm.attributes import get_history
from sqlalchemy.orm.util import identity_key

from service.store import sql
from service.store.models import (
    HoldingChange,
    LedgerMonthTotal,
    Run,
    RunDraw,
    RunLoss,
    RunOutput,
    StockMovement,
    WasteEntry,
    WasteEntryElement,
    WasteMonthTotal,
)

__all__ = ["JSON_FLOWS", "month_of", "sql_month", "month_start", "next_month", "install", "recount", "rebuild",
           "add_waste"]

# The records whose element masses are a JSON mapping: flow name, model, its time, and a filter.
JSON_FLOWS = ("run_draw", "run_output", "run_loss", "shipment")
_ALL = "all"
_INSTALLED = "_dotledger_month_totals_installed"


def month_of(moment: dt.datetime) -> str:
    """'YYYY-MM' of an aware datetime, in UTC.

    >>> month_of(dt.datetime(2026, 2, 1, 0, 30, tzinfo=dt.timezone(dt.timedelta(hours=1))))
    '2026-01'
    """
    return moment.astimezone(dt.timezone.utc).strftime("%Y-%m")


def month_start(month: str) -> dt.datetime:
    year, number = map(int, month.split("-"))
    return dt.datetime(year, number, 1, tzinfo=dt.timezone.utc)


def next_month(start: dt.datetime) -> dt.datetime:
    """The first moment of the month after the one ``start`` (a month's first moment) begins.

    >>> next_month(dt.datetime(2026, 12, 1, tzinfo=dt.timezone.utc)).isoformat()
    '2027-01-01T00:00:00+00:00'
    """
    return start.replace(year=start.year + (start.month == 12), month=start.month % 12 + 1)


def sql_month(dialect: str, column):
    """'YYYY-MM' of a (naive UTC) timestamp column, in the SQL of ``dialect``."""
    # Literal format strings (not bound parameters), so SELECT and GROUP BY hold the same expression.
    if dialect == "sqlite":
        return func.strftime(literal_column("'%Y-%m'"), column, type_=String)
    if dialect == "postgresql":
        return func.to_char(column, literal_column("'YYYY-MM'"), type_=String)
    raise NotImplementedError(f"month bucketing is written for SQLite and PostgreSQL, not {dialect!r}")


# --- recounting from the records -------------------------------------------------------------


def _within(column, months: Optional[set[str]]):
    """``column`` falls in one of ``months`` (None: no condition)."""
    if months is None:
        return None
    return or_(*[and_(column >= month_start(m), column < next_month(month_start(m))) for m in sorted(months)])


def _json_records(connection, months: Optional[set[str]]):
    """(flow, at, masses) of the records whose element masses are a JSON mapping."""
    queries = (
        ("run_draw", select(Run.started_at, RunDraw.element_mass_ug).join(Run, Run.id == RunDraw.run_id), Run.started_at),
        ("run_output", select(RunOutput.at, RunOutput.element_mass_ug), RunOutput.at),
        ("run_loss", select(RunLoss.at, RunLoss.element_mass_ug), RunLoss.at),
        ("shipment", select(StockMovement.at, StockMovement.element_mass_ug).where(StockMovement.kind == "ship"),
         StockMovement.at),
    )
    for flow, query, at_column in queries:
        condition = _within(at_column, months)
        for at, masses in connection.execute(query if condition is None else query.where(condition)):
            yield flow, at, masses


def recount(connection, months: Optional[set[str]] = None) -> tuple[dict, dict]:
    """The totals as the records make them (every month, or only ``months``).

    Returns ``({(month, container_id, element): (mass_ug, disposed_ug)}, {(month, element, flow): mass_ug})``.
    """
    dialect = connection.dialect.name
    month = sql_month(dialect, WasteEntry.at)
    disposal = select(StockMovement.waste_entry_id).where(StockMovement.waste_entry_id.is_not(None))
    disposed = case((WasteEntry.id.in_(disposal), WasteEntryElement.mass_ug), else_=0)
    query = (select(month, WasteEntry.container_id, WasteEntryElement.element,
                    cast(func.sum(WasteEntryElement.mass_ug), BigInteger), cast(func.sum(disposed), BigInteger))
             .join(WasteEntry, WasteEntry.id == WasteEntryElement.entry_id)
             .group_by(month, WasteEntry.container_id, WasteEntryElement.element))
    if months is not None:
        query = query.where(_within(WasteEntry.at, months))
    waste = {(m, c, e): (int(ug), int(gone)) for m, c, e, ug, gone in connection.execute(query)}

    month = sql_month(dialect, HoldingChange.at)
    query = (select(month, HoldingChange.element, HoldingChange.kind, cast(func.sum(HoldingChange.mass_ug), BigInteger))
             .group_by(month, HoldingChange.element, HoldingChange.kind))
    if months is not None:
        query = query.where(_within(HoldingChange.at, months))
    flows: dict = {(m, e, f"holding:{k}"): int(ug) for m, e, k, ug in connection.execute(query)}
    for flow, at, masses in _json_records(connection, months):
        for element, ug in (masses or {}).items():
            if ug:
                key = (month_of(at), element, flow)
                flows[key] = flows.get(key, 0) + int(ug)
    return waste, flows


def rebuild(connection, months: Optional[set[str]] = None) -> None:
    """Recount the totals of ``months`` (None: every month) from the records, in this transaction."""
    _recount(connection, ("waste", "ledger"), months)


def _insert(connection, waste: dict, flows: dict, *, add: bool) -> None:
    """Insert the rows (``add``: add them to rows already there, with an UPSERT), in key order."""
    for table, rows in (
        (WasteMonthTotal.__table__, [{"month": m, "container_id": c, "element": e, "mass_ug": ug, "disposed_ug": gone}
                                     for (m, c, e), (ug, gone) in sorted(waste.items())]),
        (LedgerMonthTotal.__table__, [{"month": m, "element": e, "flow": f, "mass_ug": ug}
                                      for (m, e, f), ug in sorted(flows.items())]),
    ):
        if rows:
            connection.execute(sql.adding(connection.dialect.name, table) if add else sql.inserting(table), rows)


def add_waste(connection, waste: dict[tuple[str, int, str], tuple[int, int]]) -> None:
    """Add rows written outside the ORM's flush: {(month, container id, element): (µg, disposed µg)}."""
    _insert(connection, waste, {}, add=True)


# --- keeping them in each flush --------------------------------------------------------------

# Columns whose change moves a record's contribution: a flush changing one recounts the months.
_WATCHED = {
    WasteEntry: ("waste", ("at", "container_id")),
    WasteEntryElement: ("waste", ("entry_id", "element", "mass_ug")),
    HoldingChange: ("ledger", ("at", "element", "mass_ug", "kind")),
    RunDraw: ("ledger", ("run_id", "element_mass_ug")),
    Run: ("ledger", ("started_at",)),
    RunOutput: ("ledger", ("at", "element_mass_ug")),
    RunLoss: ("ledger", ("at", "element_mass_ug")),
    StockMovement: ("both", ("at", "kind", "element_mass_ug", "waste_entry_id")),
}


class _Flush:
    """What one flush adds to the totals and which months it makes stale."""

    def __init__(self, session: Session) -> None:
        self.session = session
        self.connection = session.connection()
        self.waste: dict = defaultdict(lambda: [0, 0])
        self.flows: dict = defaultdict(int)
        self.stale: dict[str, set] = {"waste": set(), "ledger": set()}
        # Records inserted by this flush are not in the identity map until the flush ends.
        self.inserted = {(type(obj), obj.id): obj for obj in session.new if isinstance(obj, (WasteEntry, Run))}

    def _find(self, model, ident):
        """The object of ``model`` with id ``ident``: from this session when held, else None."""
        return self.inserted.get((model, ident)) or self.session.identity_map.get(identity_key(model, ident))

    def entry(self, entry_id: int) -> Optional[tuple[dt.datetime, int]]:
        """(at, container id) of a waste entry."""
        held = self._find(WasteEntry, entry_id)
        if held is not None:
            return held.at, held.container_id
        row = self.connection.execute(select(WasteEntry.at, WasteEntry.container_id)
                                      .where(WasteEntry.id == entry_id)).one_or_none()
        return None if row is None else (row[0].replace(tzinfo=dt.timezone.utc), row[1])

    def entry_elements(self, entry_id: int) -> dict[str, int]:
        held = self._find(WasteEntry, entry_id)
        if held is not None:
            return {row.element: row.mass_ug for row in held.elements}
        return dict(self.connection.execute(select(WasteEntryElement.element, WasteEntryElement.mass_ug)
                                            .where(WasteEntryElement.entry_id == entry_id)).all())

    def run_start(self, run_id: int) -> Optional[dt.datetime]:
        held = self._find(Run, run_id)
        if held is not None:
            return held.started_at
        at = self.connection.scalar(select(Run.started_at).where(Run.id == run_id))
        return None if at is None else at.replace(tzinfo=dt.timezone.utc)

    def _when(self, obj) -> Optional[dt.datetime]:
        """The time that places a record (None when it cannot be found)."""
        if isinstance(obj, WasteEntryElement):
            found = self.entry(obj.entry_id)
            return None if found is None else found[0]
        if isinstance(obj, RunDraw):
            return self.run_start(obj.run_id)
        if isinstance(obj, Run):
            return obj.started_at
        return obj.at

    def added(self, obj) -> None:
        if isinstance(obj, WasteEntryElement):
            at, container_id = self.entry(obj.entry_id)
            self.waste[(month_of(at), container_id, obj.element)][0] += obj.mass_ug
        elif isinstance(obj, HoldingChange):
            self.flows[(month_of(obj.at), obj.element, f"holding:{obj.kind}")] += obj.mass_ug
        elif isinstance(obj, (RunDraw, RunOutput, RunLoss)) or (isinstance(obj, StockMovement) and obj.kind == "ship"):
            flow = {RunDraw: "run_draw", RunOutput: "run_output", RunLoss: "run_loss"}.get(type(obj), "shipment")
            month = month_of(self._when(obj))
            for element, ug in (obj.element_mass_ug or {}).items():
                if ug:
                    self.flows[(month, element, flow)] += int(ug)
        if isinstance(obj, StockMovement) and obj.waste_entry_id is not None:
            at, container_id = self.entry(obj.waste_entry_id)
            for element, ug in self.entry_elements(obj.waste_entry_id).items():
                self.waste[(month_of(at), container_id, element)][1] += ug

    def _stale(self, tables: str, *moments: Optional[dt.datetime]) -> None:
        for table in ("waste", "ledger") if tables == "both" else (tables,):
            if any(moment is None for moment in moments):
                self.stale[table] = _ALL
            elif self.stale[table] != _ALL:
                self.stale[table].update(month_of(moment) for moment in moments)

    def changed(self, obj) -> None:
        tables, columns = _WATCHED[type(obj)]
        histories = [get_history(obj, name) for name in columns]
        if not any(h.has_changes() for h in histories):
            return
        old = dict(zip(columns, histories))
        if "at" in old or "started_at" in old:
            history = old.get("at") or old.get("started_at")
            before = history.deleted[0] if history.deleted else None  # unknown old time: recount every month
            self._stale(tables, before, self._when(obj))
        else:
            self._stale(tables, self._when(obj))
        if isinstance(obj, WasteEntryElement) and old["entry_id"].deleted:
            found = self.entry(old["entry_id"].deleted[0])
            self._stale(tables, None if found is None else found[0])
        if isinstance(obj, StockMovement):
            for entry_id in {*old["waste_entry_id"].deleted, obj.waste_entry_id} - {None}:
                found = self.entry(entry_id)
                self._stale("waste", None if found is None else found[0])

    def deleted(self, obj) -> None:
        tables, _ = _WATCHED[type(obj)]
        self._stale(tables, self._when(obj))
        if isinstance(obj, StockMovement) and obj.waste_entry_id is not None:
            found = self.entry(obj.waste_entry_id)
            self._stale("waste", None if found is None else found[0])

    def write(self) -> None:
        for table, stale in self.stale.items():
            if stale:
                _recount(self.connection, (table,), None if stale == _ALL else stale)
        waste = {key: tuple(v) for key, v in self.waste.items() if not _covered(self.stale["waste"], key[0])}
        flows = {key: v for key, v in self.flows.items() if not _covered(self.stale["ledger"], key[0])}
        _insert(self.connection, waste, flows, add=True)


def _covered(stale, month: str) -> bool:
    return stale == _ALL or month in stale


def _recount(connection, tables: tuple[str, ...], months: Optional[set[str]]) -> None:
    """Replace the ``tables``' rows of ``months`` (None: all) by a recount of the records as they stand."""
    waste, flows = recount(connection, months)
    for table in tables:
        model = WasteMonthTotal if table == "waste" else LedgerMonthTotal
        statement = delete(model.__table__)
        if months is not None:
            statement = statement.where(model.__table__.c.month.in_(sorted(months)))
        connection.execute(statement)
    _insert(connection, waste if "waste" in tables else {}, flows if "ledger" in tables else {}, add=False)


def _after_flush(session: Session, _context) -> None:
    flush = _Flush(session)
    watched = tuple(_WATCHED)
    for obj in session.new:
        if isinstance(obj, watched):
            flush.added(obj)
    for obj in session.dirty:
        if isinstance(obj, watched):
            flush.changed(obj)
    for obj in session.deleted:
        if isinstance(obj, watched):
            flush.deleted(obj)
    flush.write()


def _bulk(execute_state):
    """An ORM bulk UPDATE or DELETE of records the totals sum (``session.execute(update(HoldingChange)…)``;
    the service writes none): run it, then recount every month, since which rows it changed is not known."""
    if not (execute_state.is_update or execute_state.is_delete):
        return None
    mapper = execute_state.bind_mapper
    if mapper is None or mapper.class_ not in _WATCHED:
        return None
    result = execute_state.invoke_statement()
    rebuild(execute_state.session.connection())
    return result


def install(factory: sessionmaker) -> None:
    """Keep the monthly totals in every flush of sessions made by ``factory``, and after an ORM bulk
    UPDATE or DELETE of the records (once, however often called)."""
    # The mark lives on the factory itself, as audit.install's does: event.contains() looks listeners up
    # by id(), and a new factory can take the id of a collected one, which would skip the install (and
    # leave that factory's sessions writing records without their totals).
    if factory.__dict__.get(_INSTALLED):
        return
    event.listen(factory, "after_flush", _after_flush)
    event.listen(factory, "do_orm_execute", _bulk)
    setattr(factory, _INSTALLED, True)

