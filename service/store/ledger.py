"""Ledger reports: element mass leaving as waste and on hand, as pandas DataFrames.

Every figure is summed in SQL (GROUP BY with SUM over the stored integer µg), so a report moves
only its groups, never the entries, into Python. The waste report reads the monthly totals kept
with every entry (``store.month_totals``), so it costs what its answer holds, not what the history
holds; only the days of a range that do not fill a month are summed from their entries. Entries
are signed (a reversal is negative), so the sums are net. Months are the UTC calendar month of the
entry's ``at``, bucketed in SQL as ``'YYYY-MM'``.
"""

from __future__ import annotations

import datetime as dt
import io
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable, Iterable, Optional, Sequence

from sqlalchemy import BigInteger, cast, func, select, union_all
from sqlalchemy.orm import Session

from service.store.models import (
    Lab,
    Location,
    Mixture,
    MixtureElement,
    Stock,
    StockElement,
    WasteContainer,
    WasteEntry,
    WasteEntryElement,
    WasteMonthTotal,
)
from service.store import month_totals
from service.store.sheets import neutralise_frame

if TYPE_CHECKING:  # pandas is imported where a table is made (a slow import; most commands make none)
    import pandas as pd

__all__ = ["CAUTION", "UNITS", "UnknownGroupKey", "Report", "REPORTS", "waste_by", "inventory_on_hand",
           "run_report", "to_csv_bytes", "to_xlsx_bytes", "XLSX", "download"]

CAUTION = ("These figures are records for the site's own use, summed from the entries as recorded. "
           "Waste classification and reporting obligations rest with local regulations and the site safety officer.")
UNITS = {"mass_ug": "µg", "mass_mg": "mg"}

WASTE_KEYS = ("element", "stream", "lab", "container", "month")
INVENTORY_KEYS = ("element", "location", "lab")


class UnknownGroupKey(ValueError):
    """A ``by`` key a report cannot group by; carries the key, the report and the allowed keys."""

    def __init__(self, report: str, key: str, allowed: Sequence[str]) -> None:
        self.report, self.key, self.allowed = report, key, tuple(allowed)
        super().__init__(f"the {report} report cannot group by {key!r}; choose from {', '.join(allowed)}")


def _month(session: Session, column):
    """'YYYY-MM' of a (naive UTC) timestamp column, in the session's SQL dialect."""
    return month_totals.sql_month(session.get_bind().dialect.name, column)


def _start_of(day: dt.date | dt.datetime) -> dt.datetime:
    if isinstance(day, dt.datetime):
        return day if day.tzinfo else day.replace(tzinfo=dt.timezone.utc)
    return dt.datetime(day.year, day.month, day.day, tzinfo=dt.timezone.utc)


def _frame(session: Session, query, columns: list[str]) -> pd.DataFrame:
    import pandas as pd

    frame = pd.DataFrame.from_records(session.execute(query).all(), columns=[*columns, "mass_ug"])
    frame["mass_ug"] = frame["mass_ug"].astype("int64")
    frame["mass_mg"] = frame["mass_ug"] / 1000
    return frame


def _month_floor(moment: dt.datetime) -> dt.datetime:
    return moment.astimezone(dt.timezone.utc).replace(day=1, hour=0, minute=0, second=0, microsecond=0)


def _month_ceiling(moment: dt.datetime) -> dt.datetime:
    floor = _month_floor(moment)
    return floor if floor == moment else month_totals.next_month(floor)


def _waste_part(session: Session, by: tuple[str, ...], start: Optional[dt.datetime], end: Optional[dt.datetime],
                lab_ids: Optional[Iterable[int]], element: Optional[str], *, kept: bool):
    """The waste groups of ``by`` over [start, end): from the monthly totals (``kept``; the bounds are then
    whole months) or from the entries themselves."""
    if kept:
        rows, mass = WasteMonthTotal, WasteMonthTotal.mass_ug
        keys = {"element": rows.element, "month": rows.month}
        query = select().select_from(rows).join(WasteContainer, WasteContainer.id == rows.container_id)
        if start is not None:
            query = query.where(rows.month >= start.strftime("%Y-%m"))
        if end is not None:
            query = query.where(rows.month < end.strftime("%Y-%m"))
    else:
        rows, mass = WasteEntryElement, WasteEntryElement.mass_ug
        keys = {"element": rows.element, "month": _month(session, WasteEntry.at)}
        query = (select().select_from(rows).join(WasteEntry, WasteEntry.id == rows.entry_id)
                 .join(WasteContainer, WasteContainer.id == WasteEntry.container_id))
        if start is not None:
            query = query.where(WasteEntry.at >= start)
        if end is not None:
            query = query.where(WasteEntry.at < end)
    keys |= {"stream": WasteContainer.stream, "lab": Lab.code, "container": WasteContainer.label}
    if "lab" in by:  # every container has a lab: the join only adds the code
        query = query.join(Lab, Lab.id == WasteContainer.lab_id)
    if lab_ids is not None:
        query = query.where(WasteContainer.lab_id.in_(sorted(lab_ids)))
    if element is not None:
        query = query.where(rows.element == element)
    return (query.add_columns(*[keys[k].label(k) for k in by], func.sum(mass).label("mass_ug"))
            .group_by(*[keys[k] for k in by]))


def waste_by(session: Session, by: Sequence[str], *, since: dt.date | dt.datetime | None = None,
             until: dt.date | dt.datetime | None = None, lab_ids: Optional[Iterable[int]] = None,
             element: Optional[str] = None) -> pd.DataFrame:
    """Net element mass put into waste containers, grouped by ``by`` (keys of ``WASTE_KEYS``).

    ``since`` is inclusive; ``until`` is inclusive of the whole day when it is a date (a
    datetime is an exclusive bound). Columns: the keys (lab code, container label, stream,
    'YYYY-MM') in the order given, then ``mass_ug`` (int) and ``mass_mg`` (float).

    Whole months come from the monthly totals (``store.month_totals``); the days of a range that do
    not fill a month come from the entries of those days alone.
    """
    by = REPORTS["waste"].check_by(by)
    start = None if since is None else _start_of(since)
    end = None if until is None else (
        _start_of(until) if isinstance(until, dt.datetime) else _start_of(until + dt.timedelta(days=1)))
    whole_from = None if start is None else _month_ceiling(start)
    whole_to = None if end is None else _month_floor(end)
    if whole_from is not None and whole_to is not None and whole_from >= whole_to:  # no whole month inside
        parts = [_waste_part(session, by, start, end, lab_ids, element, kept=False)]
    else:
        parts = [_waste_part(session, by, whole_from, whole_to, lab_ids, element, kept=True)]
        if start is not None and start < whole_from:
            parts.append(_waste_part(session, by, start, whole_from, lab_ids, element, kept=False))
        if end is not None and whole_to < end:
            parts.append(_waste_part(session, by, whole_to, end, lab_ids, element, kept=False))
    groups = union_all(*parts).subquery("groups") if len(parts) > 1 else parts[0].subquery("groups")
    keys = [groups.c[k] for k in by]
    query = (select(*keys, cast(func.coalesce(func.sum(groups.c.mass_ug), 0), BigInteger))
             .group_by(*keys).order_by(*keys))
    return _frame(session, query, list(by))


def inventory_on_hand(session: Session, by: Sequence[str] = ("element", "location"), *,
                      lab_ids: Optional[Iterable[int]] = None, element: Optional[str] = None) -> pd.DataFrame:
    """Element mass on hand in active stocks and mixtures (both together), grouped by ``by``.

    ``location`` expands to the columns building, room and storage. Columns: the keys, then
    ``mass_ug`` (int) and ``mass_mg`` (float).
    """
    by = REPORTS["inventory"].check_by(by)
    held = []
    for rows, fk, owner in ((StockElement, StockElement.stock_id, Stock),
                            (MixtureElement, MixtureElement.mixture_id, Mixture)):
        part = (select(rows.element.label("element"), owner.location_id.label("location_id"),
                       owner.lab_id.label("lab_id"), rows.mass_ug.label("mass_ug"))
                .join(owner, owner.id == fk).where(owner.retired_at.is_(None)))
        if lab_ids is not None:
            part = part.where(owner.lab_id.in_(sorted(lab_ids)))
        if element is not None:
            part = part.where(rows.element == element)
        held.append(part)
    held = union_all(*held).subquery("held")
    keys = {"element": [("element", held.c.element)], "lab": [("lab", Lab.code)],
            "location": [("building", Location.building), ("room", Location.room), ("storage", Location.storage)]}
    groups = [pair for k in by for pair in keys[k]]
    query = (
        select(*[column.label(name) for name, column in groups],
               cast(func.coalesce(func.sum(held.c.mass_ug), 0), BigInteger))
        .select_from(held)
        .join(Location, Location.id == held.c.location_id)
        .join(Lab, Lab.id == held.c.lab_id)
    )
    if groups:
        plain = [column for _, column in groups]
        query = query.group_by(*plain).order_by(*plain)
    return _frame(session, query, [name for name, _ in groups])


@dataclass(frozen=True)
class Report:
    """A named report: the keys it may group by, its default grouping and its builder."""

    name: str
    keys: tuple[str, ...]
    default_by: tuple[str, ...]
    build: Callable[..., pd.DataFrame]

    def check_by(self, by: Optional[Sequence[str]]) -> tuple[str, ...]:
        """``by`` without repeats, or the default when empty; UnknownGroupKey for a foreign key."""
        if not by:
            return self.default_by
        for key in by:
            if key not in self.keys:
                raise UnknownGroupKey(self.name, key, self.keys)
        return tuple(dict.fromkeys(by))


REPORTS = {
    "waste": Report("waste", WASTE_KEYS, ("element", "stream", "month"), waste_by),
    "inventory": Report("inventory", INVENTORY_KEYS, ("element", "location"), inventory_on_hand),
}


def run_report(session: Session, name: str, by: Optional[Sequence[str]] = None, **filters) -> pd.DataFrame:
    """The report ``name`` (a key of REPORTS) grouped by ``by`` with its filters."""
    report = REPORTS[name]
    return report.build(session, report.check_by(by), **filters)


def to_csv_bytes(df: pd.DataFrame, *, caution: Optional[str] = CAUTION) -> bytes:
    """UTF-8 CSV; the first line is ``# <caution>`` unless ``caution`` is None.

    Text a spreadsheet would read as a formula gets a leading ``'`` (``sheets.neutralise_cell``).
    Read it back with ``pd.read_csv(buffer, skiprows=1)``.
    """
    head = f"# {caution}\n" if caution else ""
    return (head + neutralise_frame(df).to_csv(index=False, lineterminator="\n")).encode("utf-8")


def to_xlsx_bytes(df: pd.DataFrame, *, caution: Optional[str] = CAUTION, sheet: str = "report") -> bytes:
    """An XLSX workbook: the table on the first sheet, the caution and units on a sheet "about".

    Text cells are neutralised as in the CSV: openpyxl stores any text that starts with ``=`` as a
    formula, and after ``neutralise_frame`` none does, so every text cell is stored as text.
    """
    import pandas as pd

    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        neutralise_frame(df).to_excel(writer, sheet_name=sheet, index=False)
        notes = [caution] if caution else []
        notes += [f"{column}: {unit}" for column, unit in UNITS.items()]
        pd.DataFrame({"about": notes}).to_excel(writer, sheet_name="about", index=False)
    return buffer.getvalue()


XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


def download(frame: pd.DataFrame, report: str, fmt: str) -> tuple[bytes, str, str]:
    """(body, media type, file name) of ``frame`` as a CSV or XLSX download of the report ``report``.

    The one way the API's report routes and the ledger page write a report to a file.
    """
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    if fmt == "csv":
        body, mimetype = to_csv_bytes(frame), "text/csv; charset=utf-8"
    elif fmt == "xlsx":
        body, mimetype = to_xlsx_bytes(frame, sheet=report), XLSX
    else:
        raise ValueError(f"a report downloads as csv or xlsx, not {fmt!r}")
    return body, mimetype, f"dotledger-{report}-{stamp}.{fmt}"
