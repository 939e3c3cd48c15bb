"""The waste entries that count toward the generator category, as plain facts for ``rules.generator``.

One query for the entries (with their containers and, for a reversal, the entry it reverses) and
one for their components; months are bucketed in Python from the entry's time in UTC. A reversal
is counted in the month of the entry it reverses, so each month is net of its corrections.
"""

from __future__ import annotations

import datetime as dt
from typing import Iterable

from sqlalchemy import func, select
from sqlalchemy.orm import Session, aliased

from service.rules import LayeredRules
from service.rules.generator import EntryPart, GeneratedEntry, MonthCategory, categorise, month_totals, months_between
from service.store.models import Substance, WasteContainer, WasteEntry, WasteEntryComponent

__all__ = ["month_start", "generated_entries", "generator_months"]


def month_start(month: str) -> dt.datetime:
    """The first instant (UTC) of "YYYY-MM"."""
    year, number = map(int, month.split("-"))
    return dt.datetime(year, number, 1, tzinfo=dt.timezone.utc)


def _next(month: str) -> dt.datetime:
    start = month_start(month)
    return dt.datetime(start.year + (start.month == 12), start.month % 12 + 1, 1, tzinfo=dt.timezone.utc)


def generated_entries(session: Session, since: str, until: str, streams: Iterable[str]) -> list[GeneratedEntry]:
    """The entries (and reversals) into containers of ``streams`` counted in the months ``since``..``until``."""
    original = aliased(WasteEntry)
    counted_at = func.coalesce(original.at, WasteEntry.at)
    rows = session.execute(
        select(WasteEntry.id, counted_at, WasteEntry.volume_ul, WasteEntry.mass_ug, WasteContainer.form,
               WasteContainer.acute_hazardous)
        .join(WasteContainer, WasteContainer.id == WasteEntry.container_id)
        .outerjoin(original, original.id == WasteEntry.reverses_entry_id)
        .where(WasteContainer.stream.in_(sorted(set(streams))), counted_at >= month_start(since),
               counted_at < _next(until))
        .order_by(WasteEntry.id)).all()
    parts: dict[int, list[EntryPart]] = {}
    ids = [row[0] for row in rows]
    for start in range(0, len(ids), 500):  # bounded IN lists
        for entry_id, name, ul, density in session.execute(
                select(WasteEntryComponent.entry_id, Substance.name, WasteEntryComponent.volume_ul,
                       Substance.density_g_per_ml)
                .join(Substance, Substance.id == WasteEntryComponent.substance_id)
                .where(WasteEntryComponent.entry_id.in_(ids[start:start + 500]))
                .order_by(WasteEntryComponent.entry_id, Substance.name)):
            parts.setdefault(entry_id, []).append(EntryPart(name, ul, density))
    out = []
    for entry_id, at, volume_ul, mass_ug, form, acute in rows:
        at = at if at.tzinfo else at.replace(tzinfo=dt.timezone.utc)
        out.append(GeneratedEntry(at.astimezone(dt.timezone.utc).strftime("%Y-%m"), bool(acute), form,
                                  volume_ul, mass_ug, tuple(parts.get(entry_id, ()))))
    return out


def generator_months(session: Session, rules: LayeredRules, since: str, until: str) -> list[MonthCategory]:
    """Each month ``since``..``until`` with its kg, generator category and findings (the packs' waste_counting).

    Without a pack that says what counts (``waste_counting``) nothing is counted: every month is zero.
    """
    counting = rules.waste_counting
    entries = generated_entries(session, since, until, counting.streams) if counting is not None else []
    subjects = month_totals(entries, months_between(since, until), rules.assumed_density_g_per_ml or 0)
    return categorise(rules, subjects)
