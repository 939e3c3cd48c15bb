"""Accumulation areas: locations of an accumulation kind, their containers' sums and their clock.

An area's limits apply to the sum of its containers not yet collected. ``over_limit_since`` on the
location is set in the transaction of the entry that took the area over a limit (a rule of scope
``accumulation_area`` that ``marks: area_over_limit`` fires) and cleared in the transaction of the
reversal or collection that brought it back under; two entries into two containers of one area are
judged one after the other (:func:`refresh_clock`).
"""

from __future__ import annotations

import datetime as dt
from functools import cache
from typing import Optional

from sqlalchemy import and_, bindparam, select
from sqlalchemy.orm import Session

from service import vocab
from service.errors import NotFound
from service.rules import LayeredRules, evaluate
from service.rules.subjects import AreaContainer, AreaSubject
from service.store import audit
from service.store.models import Location, WasteContainer, WasteContainerTotals, utcnow
from service.store.paging import Page, paginate

__all__ = ["AREA_KINDS", "OPEN_STATES", "is_area", "location_of", "label_of", "get_area", "list_areas", "containers_in", "subject_of",
           "forget", "refresh_clock"]

AREA_KINDS = vocab.ACCUMULATION_AREA_KINDS
OPEN_STATES = tuple(s for s in vocab.CONTAINER_STATES if s != "collected")  # still in the area
_MEMO = "dotledger.area_subjects"
_LOCATIONS = "dotledger.area_locations"


def is_area(location: Optional[Location]) -> bool:
    return location is not None and location.kind in AREA_KINDS


def location_of(session: Session, location_id: int) -> Optional[Location]:
    """The location, loaded once per session (a list of containers in one area reads it once)."""
    held = session.info.setdefault(_LOCATIONS, {})
    if location_id not in held:
        held[location_id] = session.get(Location, location_id)
    return held[location_id]


def label_of(location) -> str:
    """"building / room / storage" of a Location (or a row with those columns)."""
    return f"{location.building} / {location.room} / {location.storage}"


def get_area(session: Session, ident: int) -> Location:
    """The accumulation area ``ident``; NotFound for a missing id or a location that is not an area."""
    location = session.get(Location, ident)
    if not is_area(location):
        raise NotFound("accumulation area", ident)
    return location


def list_areas(session: Session, *, lab_ids: Optional[set[int]] = None, limit: Optional[int] = None,
               offset: int = 0) -> Page:
    """A page of the accumulation areas in id order (a lab-scoped caller: its labs' and shared ones)."""
    query = select(Location).where(Location.kind.in_(AREA_KINDS), Location.retired_at.is_(None))
    if lab_ids is not None:
        query = query.where(Location.lab_id.in_(sorted(lab_ids)) | Location.lab_id.is_(None))
    return paginate(session, query.order_by(Location.id), limit, offset)


def containers_in(session: Session, location_id: int, now: dt.datetime) -> list[AreaContainer]:
    """The area's containers not yet collected, in id order, with their running totals (one statement)."""
    session.flush()  # as a query through the session would (autoflush)
    return _containers(session.connection().execute(_statements()[0], {"location": location_id}), now)


def _containers(rows, now: dt.datetime) -> list[AreaContainer]:
    return [AreaContainer(label=label, form=form, volume_l=(volume_ul or 0) / 1e6, mass_kg=(mass_ug or 0) / 1e9,
                          acute_hazardous=bool(acute), days_since_first_entry=_days(first, now))
            for label, form, acute, first, volume_ul, mass_ug in rows if label is not None]


_CONTAINER_COLUMNS = (WasteContainer.label, WasteContainer.form, WasteContainer.acute_hazardous,
                      WasteContainer.first_entry_at, WasteContainerTotals.volume_ul, WasteContainerTotals.mass_ug)


@cache
def _statements():
    """Built once: the area's containers not yet collected with their totals; the same with the location's
    own columns first (one row per container, one row with no container for an empty area)."""
    open_in = and_(WasteContainer.location_id == Location.id, WasteContainer.state.in_(OPEN_STATES))
    return (select(*_CONTAINER_COLUMNS)
            .outerjoin(WasteContainerTotals, WasteContainerTotals.container_id == WasteContainer.id)
            .where(WasteContainer.location_id == bindparam("location"), WasteContainer.state.in_(OPEN_STATES))
            .order_by(WasteContainer.id),
            select(Location.kind, Location.over_limit_since, Location.building, Location.room, Location.storage,
                   *_CONTAINER_COLUMNS)
            .select_from(Location).outerjoin(WasteContainer, open_in)
            .outerjoin(WasteContainerTotals, WasteContainerTotals.container_id == WasteContainer.id)
            .where(Location.id == bindparam("location")).order_by(WasteContainer.id))


def _days(since: Optional[dt.datetime], now: dt.datetime) -> Optional[float]:
    return None if since is None else (now - since).total_seconds() / 86400


def _build(session: Session, location: Location, now: dt.datetime) -> AreaSubject:
    return AreaSubject(label_of(location), location.kind, tuple(containers_in(session, location.id, now)),
                       _days_over(location.over_limit_since, now))


def _days_over(since: Optional[dt.datetime], now: dt.datetime) -> Optional[int]:
    """Whole calendar days (UTC) since the area went over its limit; None while it is not."""
    return None if since is None else (now.date() - since.astimezone(dt.timezone.utc).date()).days


def subject_of(session: Session, location: Location, now: Optional[dt.datetime] = None) -> AreaSubject:
    """The facts the area rules evaluate, built once per session per area (writes call :func:`forget`)."""
    memo = session.info.setdefault(_MEMO, {})
    if now is not None or location.id not in memo:
        subject = _build(session, location, now or utcnow())
        if now is not None:
            return subject
        memo[location.id] = subject
    return memo[location.id]


def forget(session: Session) -> None:
    """Drop the session's built area subjects (a container's contents or state changed)."""
    session.info.pop(_MEMO, None)


def refresh_clock(session: Session, location_id: int, rules: Optional[LayeredRules]) -> None:
    """Set or clear the area's ``over_limit_since`` after a change to its containers (in the same transaction).

    The area is over its limit when a rule marking ``area_over_limit`` fires on its present sums.
    Without ``rules`` (a caller that judges nothing) the clock is left alone. Two changes to one area
    are judged one after the other: the audit chain's head row is locked from this transaction's first
    recorded change to its commit (:func:`service.store.audit.hold_head`), and every change to a container
    or location is recorded, so the sums read here stay as read until this transaction commits.
    """
    forget(session)
    if rules is None:
        return
    session.flush()  # this transaction's own changes, and with them the chain's head
    audit.hold_head(session)
    rows = session.connection().execute(_statements()[1], {"location": location_id}).all()
    if not rows or rows[0][0] not in AREA_KINDS:
        return
    kind, since = rows[0][:2]
    now = utcnow()
    subject = AreaSubject(label_of(rows[0]), kind, tuple(_containers((r[5:] for r in rows), now)),
                          _days_over(since, now))
    marked = rules.marked("accumulation_area")
    over = any(f.rule_id in marked for f in evaluate(rules, "accumulation_area", subject))
    if over != (since is not None):
        session.get(Location, location_id).over_limit_since = now if over else None
        session.flush()
    forget(session)
