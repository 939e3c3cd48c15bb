"""Audit log: an append-only, hash-chained record of every change to the ledger.

Every flush of a session from an installed factory writes one event per created, updated,
retired or deleted row, in the same transaction as the change. Each event stores the SHA-256
of its content and of the event before it, so editing, removing or reordering a stored event
breaks the chain that ``verify_chain`` walks.
"""

from __future__ import annotations

import datetime as dt
import math
from decimal import Decimal
from functools import cache
from typing import Any, Callable, NamedTuple, Optional

from sqlalchemy import event, func, insert, inspect, or_, select, update
from sqlalchemy.orm import Session

from service.store import audit_chain, sql
from service.store.audit_chain import GENESIS, ChainReport, event_digest, find_hash, verify_chain  # noqa: F401
from service.store.models import Base, utcnow
from service.store.paging import Page, paginate

__all__ = [
    "AuditEvent",
    "AuditHead",
    "ChainReport",
    "GENESIS",
    "NOT_AUDITED",
    "event_digest",
    "json_safe",
    "redact_secrets",
    "install",
    "verify_chain",
    "find_hash",
    "list_events",
    "created",
    "record",
    "hold_head",
]

NOT_AUDITED = frozenset({"audit_events", "audit_head", "login_attempts", "stock_elements", "mixture_elements",
                         "idempotency_keys", "waste_container_totals", "waste_container_elements",
                         "waste_container_components", "waste_month_totals", "ledger_month_totals"})
SECRETS = {"password_hash": "password_changed", "token_hash": "token_changed"}
# A change to these alone is bookkeeping, not an event worth a link in the chain
# (``last_used_at`` would otherwise add one per token-authenticated request).
BOOKKEEPING = frozenset({"updated_at", "last_used_at"})
SYSTEM_ACTOR = {"user_id": None, "label": "system"}
_PENDING = "dotledger.audit.pending"
_HEAD = "dotledger.audit.head"  # the transaction holding the head row locked
_INSTALLED = "_dotledger_audit_installed"


class AuditEvent(Base):
    """One recorded change; ascending ``id`` is chain order (the table: ``audit_chain.events``)."""

    __table__ = audit_chain.events


class AuditHead(Base):
    """The chain's single row (id 1): last event id (0 before any event) and its hash."""

    __table__ = audit_chain.head


def json_safe(value: Any) -> Any:
    """``value`` with dates as ISO text, Decimals as text and containers as dicts/lists.

    >>> json_safe({"on": dt.date(2026, 1, 2), "ug": Decimal("1.50"), "tags": ("a",)})
    {'on': '2026-01-02', 'ug': '1.50', 'tags': ['a']}
    """
    if isinstance(value, dt.datetime):
        if value.tzinfo is not None:
            value = value.astimezone(dt.timezone.utc)
        return value.isoformat(timespec="microseconds")
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, Decimal):
        return str(value)
    if isinstance(value, float) and not math.isfinite(value):
        return str(value)  # JSON has no NaN or infinity
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, frozenset)):
        return [json_safe(v) for v in value]
    if isinstance(value, bytes):
        return value.hex()
    if value is None or isinstance(value, (str, int, float)):
        return value
    return str(value)


def redact_secrets(before: Optional[dict], after: Optional[dict]) -> tuple[Optional[dict], Optional[dict]]:
    """Copies without secret columns; ``after`` gets ``<secret>_changed: true`` where one changed."""
    before = None if before is None else dict(before)
    after = None if after is None else dict(after)
    for column, marker in SECRETS.items():
        old = before.pop(column, None) if before is not None else None
        present = after is not None and column in after
        new = after.pop(column, None) if after is not None else None
        if present and new != old:
            after[marker] = True
    return before, after


# --- recording ------------------------------------------------------------------


class _Change(NamedTuple):
    entity: str
    key: tuple
    action: str
    before: Optional[dict]
    after: Optional[dict]


def _columns(mapper) -> list[tuple[str, str]]:
    """(attribute key, column name) for the columns of the mapped table itself."""
    table = mapper.local_table
    return [(p.key, p.columns[0].name) for p in mapper.column_attrs if getattr(p.columns[0], "table", None) is table]


def _audited(state) -> bool:
    return issubclass(state.class_, Base) and state.mapper.local_table.name not in NOT_AUDITED


def _row(session: Session, state) -> dict[str, Any]:
    """The row as stored right now, read with core so nothing is loaded into the session."""
    mapper = state.mapper
    ident = state.identity or tuple(state.dict.get(mapper.get_property_by_column(c).key) for c in mapper.primary_key)
    query = select(mapper.local_table).where(*(c == v for c, v in zip(mapper.primary_key, ident)))
    row = session.connection().execute(query).mappings().one_or_none()
    return {} if row is None else {name: row[name] for _, name in _columns(mapper)}


def _stored(session: Session, state) -> dict[str, Any]:
    """Column values as last stored: from attribute history, or the row if one was never loaded."""
    values = {}
    for key, name in _columns(state.mapper):
        history = state.attrs[key].history
        if history.deleted:
            values[name] = history.deleted[0]
        elif history.unchanged:
            values[name] = history.unchanged[0]
        else:  # unloaded (expired) value, possibly overwritten since
            return _row(session, state)
    return values


def _stored_null(column) -> bool:
    """True when an INSERT that leaves ``column`` out stores NULL: nothing on the server fills it in."""
    return (column.server_default is None and column.server_onupdate is None and column.computed is None
            and column.identity is None and not column.primary_key)


def _current(session: Session, state, created: bool = False) -> dict[str, Any]:
    """Column values after the flush; expired or server-made values are read back.

    A row just inserted is not read back for a column the INSERT left out when no server default
    fills it in: it holds NULL (SQLAlchemy sends no value, the database stores none).
    """
    columns = _columns(state.mapper)
    missing = [key for key, _ in columns if key not in state.dict]
    if not missing:
        return {name: state.dict[key] for key, name in columns}
    if created and all(_stored_null(state.mapper.get_property(key).columns[0]) for key in missing):
        return {name: state.dict.get(key) for key, name in columns}
    return _row(session, state)


def _change(session: Session, state, captured: dict, new: set, isdelete: bool) -> Optional[_Change]:
    if isdelete:
        before, after, action = captured.get(state) or _stored(session, state), None, "delete"
    elif state in new:
        before, after, action = None, _current(session, state, created=True), "create"
    else:
        before, after = captured.get(state) or _stored(session, state), _current(session, state)
        before, after = json_safe(before), json_safe(after)
        if all(before.get(k) == after.get(k) for k in (before.keys() | after.keys()) - BOOKKEEPING):
            return None
        retired = "retired_at" in after and before.get("retired_at") is None and after["retired_at"] is not None
        action = "retire" if retired else "update"
        if "state" in after and before.get("state") != after["state"]:  # workflow transitions name both ends
            action = f"state_change:{before.get('state')}->{after['state']}"
    values = after if after is not None else before
    key = tuple(values.get(c.name) for c in state.mapper.primary_key)
    before, after = redact_secrets(json_safe(before), json_safe(after))
    return _Change(state.mapper.local_table.name, key, action, before, after)


def _before_flush(session: Session, flush_context, instances) -> None:
    """Capture the stored state of rows about to change while the database still holds it."""
    states = [inspect(o) for o in session.dirty if session.is_modified(o, include_collections=False)]
    states += [inspect(o) for o in session.deleted]
    session.info[_PENDING] = {s: _stored(session, s) for s in states if _audited(s) and s.has_identity}


def _after_flush(session: Session, flush_context) -> None:
    """Write one event per changed audited row, in this transaction, under the locked head."""
    captured = session.info.pop(_PENDING, None)
    if captured is None:  # a second registration of these listeners already wrote this flush
        return
    new = {inspect(o) for o in session.new}
    changes = []
    for state, (isdelete, listonly) in flush_context.states.items():
        if not listonly and _audited(state):
            change = _change(session, state, captured, new, isdelete)
            if change is not None:
                changes.append(change)
    if changes:
        _append(session, sorted(changes, key=lambda c: (c.entity, c.key)))


def created(table, values: dict[str, Any]) -> _Change:
    """The event of a row inserted with a Core statement: ``values`` by column name, as the ORM's flush records it."""
    after = {column.name: values.get(column.name) for column in table.columns}
    key = tuple(after[column.name] for column in table.primary_key)
    _, after = redact_secrets(None, json_safe(after))
    return _Change(table.name, key, "create", None, after)


def record(session: Session, changes: list[_Change], *, with_writes: Optional[Callable[[], None]] = None) -> None:
    """Append events for rows written outside the ORM's flush (:func:`created`), in this transaction.

    ``with_writes`` runs once the chain's head is locked, its statements sent with the events' (one round
    trip on PostgreSQL, :func:`service.store.sql.sent_together`): writes whose results are not read."""
    if changes:
        _append(session, sorted(changes, key=lambda c: (c.entity, c.key)), with_writes)


def _append(session: Session, changes: list[_Change], with_writes: Optional[Callable[[], None]] = None) -> None:
    actor = session.info.get("actor") or SYSTEM_ACTOR
    user_id, label = actor.get("user_id"), str(actor.get("label") or "system")
    reading, inserting, moving = _statements()
    connection = session.connection()
    # The lock (SQLite: the immediate transaction) makes concurrent writers queue here.
    row = connection.execute(reading).one_or_none()
    if row is None:
        raise RuntimeError("the audit_head row is missing; upgrade the database (dotledger init)")
    session.info[_HEAD] = session.get_transaction()
    last_id, last_hash = row
    at = utcnow()  # taken under the lock, so chain order is also time order
    rows = []
    for c in changes:
        entity_id = ",".join(str(v) for v in c.key)
        digest = event_digest(last_hash, at, user_id, label, c.entity, entity_id, c.action, c.before, c.after)
        last_id += 1
        rows.append(dict(id=last_id, at=at, actor_user_id=user_id, actor_label=label, entity=c.entity,
                         entity_id=entity_id, action=c.action, before=c.before, after=c.after,
                         prev_hash=last_hash, hash=digest))
        last_hash = digest
    with sql.sent_together(connection):  # one round trip on PostgreSQL
        if with_writes is not None:
            with_writes()
        connection.execute(inserting, rows)
        connection.execute(moving, {"last_event_id": last_id, "last_hash": last_hash})


def hold_head(session: Session) -> None:
    """Hold the chain's head row locked to the end of this transaction (at once when a change of this
    transaction was recorded already: recording takes it). Every change to the ledger is recorded, so a
    transaction holding it sees no other change commit until it has committed itself. (The service uses no
    savepoints: rolling one back would release a lock taken inside it while this still counts it held.)"""
    if session.info.get(_HEAD) is session.get_transaction():
        return
    if session.connection().execute(_statements()[0]).one_or_none() is None:
        raise RuntimeError("the audit_head row is missing; upgrade the database (dotledger init)")
    session.info[_HEAD] = session.get_transaction()


@cache
def _statements():
    """The chain's three statements, built once: read the head (locked), insert events, move the head."""
    head = AuditHead.__table__
    return (select(head.c.last_event_id, head.c.last_hash).where(head.c.id == 1).with_for_update(),
            insert(AuditEvent.__table__), update(head).where(head.c.id == 1))


def install(target) -> None:
    """Record audit events for sessions made by ``target`` (a sessionmaker or Session class).

    Installing again is harmless: a listener already present is not added twice, and a flush
    seen by two registrations (a class and a factory of it) is written once.
    """
    # The mark lives on the target itself: event.contains() looks listeners up by id(), and
    # a new factory can reuse the id of a collected one, which would skip the install.
    if target.__dict__.get(_INSTALLED):
        return
    for name, listener in (("before_flush", _before_flush), ("after_flush", _after_flush)):
        event.listen(target, name, listener)
    setattr(target, _INSTALLED, True)


# --- reading --------------------------------------------------------------------


def list_events(session: Session, *, entity: Optional[str] = None, entity_id: Any = None,
                since: Optional[dt.datetime] = None, until: Optional[dt.datetime] = None,
                actor: Optional[str] = None, action: Optional[str] = None,
                limit: Optional[int] = 100, offset: int = 0) -> Page:
    """A page of events in chain order; ``since`` is inclusive, ``until`` exclusive.

    ``actor`` matches the actor label in any case; ``action`` matches the action, and a bare
    ``state_change`` every state change.
    """
    query = select(AuditEvent)
    if actor:
        query = query.where(func.lower(AuditEvent.actor_label) == actor.strip().lower())
    if action:
        query = query.where(or_(AuditEvent.action == action, AuditEvent.action.startswith(f"{action}:", autoescape=True)))
    if entity is not None:
        query = query.where(AuditEvent.entity == entity)
    if entity_id is not None:
        query = query.where(AuditEvent.entity_id == str(entity_id))
    if since is not None:
        query = query.where(AuditEvent.at >= since)
    if until is not None:
        query = query.where(AuditEvent.at < until)
    return paginate(session, query.order_by(AuditEvent.id), limit, offset)
