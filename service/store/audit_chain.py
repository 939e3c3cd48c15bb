"""The audit trail's two tables and the check of its hash chain, in SQLAlchemy Core alone.

``service.store.audit`` writes the events (one per change, in the flush that makes it) and maps
these tables for the ORM; reading the chain back needs neither the ORM nor the other tables, so the
command that checks it (``dotledger audit-verify``) starts with this module and a connection.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
from dataclasses import dataclass
from typing import Any, NamedTuple, Optional

from sqlalchemy import JSON, CheckConstraint, Column, Index, Integer, String, Table, Text, select

from service.store.base import UTCDateTime, metadata

__all__ = ["GENESIS", "events", "head", "ChainReport", "Head", "event_digest", "verify_chain", "read_head", "find_hash"]

GENESIS = "0" * 64

# One recorded change per row; ascending ``id`` is chain order (ids are taken from the head, not generated).
events = Table(
    "audit_events", metadata,
    Column("id", Integer, primary_key=True, autoincrement=False),
    Column("at", UTCDateTime, nullable=False, index=True),
    Column("actor_user_id", Integer, nullable=True, index=True),
    Column("actor_label", Text, nullable=False),
    Column("entity", String(80), nullable=False),
    Column("entity_id", String(80), nullable=False),
    Column("action", String(80), nullable=False),
    Column("before", JSON(none_as_null=True), nullable=True),
    Column("after", JSON(none_as_null=True), nullable=True),
    Column("prev_hash", String(64), nullable=False),
    Column("hash", String(64), nullable=False),
    Index("ix_audit_events_entity_entity_id", "entity", "entity_id"),
)

# The chain's single row (id 1): the last event's id (0 before any event) and its hash.
head = Table(
    "audit_head", metadata,
    Column("id", Integer, primary_key=True, autoincrement=False),
    Column("last_event_id", Integer, nullable=False),
    Column("last_hash", String(64), nullable=False),
    CheckConstraint("id = 1", name="single_row"),
)


class Head(NamedTuple):
    last_event_id: int
    last_hash: str


@dataclass(frozen=True)
class ChainReport:
    ok: bool
    events_checked: int
    first_broken_id: Optional[int]
    reason: str


def event_digest(prev_hash, at, actor_user_id, actor_label, entity, entity_id, action, before, after) -> str:
    """SHA-256 (hex) of an event's canonical JSON, chained to ``prev_hash``.

    The encoding is a JSON object of the nine arguments under their own names, keys sorted,
    no whitespace, UTF-8 with non-ASCII characters kept; ``at`` is ISO 8601 in UTC with
    microseconds and ``entity_id`` is text. ``before``/``after`` must already be JSON-safe.

    >>> at = dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.timezone.utc)
    >>> len(event_digest(GENESIS, at, None, "system", "labs", 1, "create", None, {"code": "C-214"}))
    64
    """
    if at.tzinfo is None:
        raise ValueError("naive datetime; the audit log keeps aware UTC times")
    document = {
        "prev_hash": prev_hash,
        "at": at.astimezone(dt.timezone.utc).isoformat(timespec="microseconds"),
        "actor_user_id": actor_user_id,
        "actor_label": actor_label,
        "entity": entity,
        "entity_id": str(entity_id),
        "action": action,
        "before": before,
        "after": after,
    }
    encoded = json.dumps(document, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)
    return hashlib.sha256(encoded.encode("utf-8")).hexdigest()


# --- reading --------------------------------------------------------------------


def _broken(row: Any, prev_id: int, prev_hash: str) -> Optional[str]:
    """Why the stored event ``row`` does not follow event ``prev_id`` (None when it does)."""
    if row.id != prev_id + 1:
        return f"events {prev_id + 1}..{row.id - 1} are missing"
    if row.prev_hash != prev_hash:
        return f"prev_hash does not match the hash of event {prev_id}"
    digest = event_digest(prev_hash, row.at, row.actor_user_id, row.actor_label, row.entity,
                          row.entity_id, row.action, row.before, row.after)
    if digest != row.hash:
        return "stored hash does not match the event's content"
    return None


def verify_chain(connection, *, batch_size: int = 1000) -> ChainReport:
    """Recompute the chain in id order, batch by batch, and name the first broken event.

    ``connection`` is a Connection or a Session (both execute Core statements)."""
    top = read_head(connection)
    if top is None:
        return ChainReport(False, 0, None, "the audit_head row is missing")
    prev_id, prev_hash, checked = 0, GENESIS, 0
    # Only up to the head read first: events committed meanwhile are not a break.
    while prev_id < top.last_event_id:
        query = select(events).where(events.c.id > prev_id, events.c.id <= top.last_event_id)
        batch = connection.execute(query.order_by(events.c.id).limit(batch_size)).all()
        if not batch:
            break
        for row in batch:
            reason = _broken(row, prev_id, prev_hash)
            if reason:
                return ChainReport(False, checked, row.id, reason)
            prev_id, prev_hash, checked = row.id, row.hash, checked + 1
    if (prev_id, prev_hash) != (top.last_event_id, top.last_hash):
        reason = f"the head names event {top.last_event_id} but the chain ends at event {prev_id}"
        return ChainReport(False, checked, prev_id + 1 if prev_id < top.last_event_id else prev_id, reason)
    return ChainReport(True, checked, None, f"{checked} events verified")


def read_head(connection) -> Optional[Head]:
    """The chain's head row (None when it is missing)."""
    row = connection.execute(select(head.c.last_event_id, head.c.last_hash).where(head.c.id == 1)).one_or_none()
    return None if row is None else Head(row.last_event_id, row.last_hash)


def find_hash(connection, digest: str) -> Optional[int]:
    """The id of the event whose hash is ``digest``, 0 for the empty chain's (None when the chain holds neither)."""
    if digest == GENESIS:
        return 0
    return connection.scalar(select(events.c.id).where(events.c.hash == digest))
