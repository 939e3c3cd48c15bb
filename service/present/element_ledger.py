"""The site element ledger as people see it: JSON, a table (CSV/XLSX/terminal), one figure's records."""

from __future__ import annotations

from decimal import Decimal
from typing import TYPE_CHECKING, Iterable, Sequence

from service.balance.site import FIGURES, LedgerLine
from service.store.element_ledger import Contribution

if TYPE_CHECKING:  # pandas is imported where a table is made (a slow import; most commands make none)
    import pandas as pd

__all__ = ["CAUTION", "COLUMNS", "ledger_frame", "dump_ledger", "dump_figure", "ledger_tables", "waste_by_stream",
           "on_hand_by_lab"]

CAUTION = ("The site element ledger sums the records as entered: stocks received and corrected, runs' draws, "
           "outputs and losses, waste entries and stocks moved out. An unaccounted remainder is what runs drew "
           "and have not yet assigned. It is a record for the site's own use; reporting obligations and waste "
           "classification rest with local regulations and the site safety officer.")

# The ledger's columns in the order of its equation, all exact integer µg, then the checks.
COLUMNS = ("month", "element", "opening_ug", "received_ug", "into_products_ug", "into_waste_ug", "shipped_out_ug",
           "declared_losses_ug", "corrections_ug", "closing_ug", "unaccounted_ug", "drawn_ug", "difference_ug",
           "tolerance_percent", "closes")


def ledger_frame(lines: Iterable[LedgerLine]) -> pd.DataFrame:
    """One row per element and month, columns :data:`COLUMNS` (masses in µg)."""
    import pandas as pd

    frame = pd.DataFrame([line.to_dict() for line in lines], columns=list(COLUMNS))
    for column in COLUMNS:
        if column.endswith("_ug"):
            frame[column] = frame[column].astype("int64")
    return frame


def dump_ledger(lines: Sequence[LedgerLine]) -> dict:
    rows = [line.to_dict() for line in lines]
    return {"report": "elements", "figures": list(FIGURES), "rows": rows, "count": len(rows),
            "closes": all(line.closes for line in lines), "units": {"*_ug": "µg", "tolerance_percent": "%"},
            "caution": CAUTION}


def dump_figure(element: str, month: str, figure: str, parts: Sequence[Contribution]) -> dict:
    return {"element": element, "month": month, "figure": figure, "mass_ug": sum(p.mass_ug for p in parts),
            "contributions": [p.to_dict() for p in parts], "count": len(parts), "units": {"mass_ug": "µg"},
            "caution": CAUTION}


def ledger_tables(lines: Sequence[LedgerLine]) -> list[dict]:
    """The ledger as one table per element (in the order the lines come), each row a month.

    >>> from service.balance.site import LedgerLine
    >>> line = lambda el, m: LedgerLine(m, el, 0, 5, 0, 0, 0, 0, 0, 5, 0, 0, 0, 5.0, True)
    >>> [(t["element"], [r["month"] for r in t["rows"]]) for t in ledger_tables(
    ...     [line("Se", "2026-01"), line("Cd", "2026-01"), line("Se", "2026-02")])]
    [('Se', ['2026-01', '2026-02']), ('Cd', ['2026-01'])]
    """
    tables: dict[str, list[dict]] = {}
    for line in lines:
        tables.setdefault(line.element, []).append(line.to_dict())
    return [{"element": element, "rows": rows, "closes": all(r["closes"] for r in rows)}
            for element, rows in tables.items()]


def _mg(ug: int) -> Decimal:
    return Decimal(int(ug)) / 1000


def waste_by_stream(frame: pd.DataFrame, months: Sequence[str]) -> list[dict]:
    """Per element, the metal put into waste each month by stream (mg, exact), for a chart and its table.

    ``frame`` is ``ledger.waste_by(session, ("element", "stream", "month"), ...)``; every month of
    ``months`` is a category (a month without entries reads 0), each stream a series.

    >>> import pandas as pd
    >>> frame = pd.DataFrame({"element": ["Cd", "Cd", "Cd"], "stream": ["aqueous_metal", "halogenated", "aqueous_metal"],
    ...                       "month": ["2026-01", "2026-01", "2026-03"], "mass_ug": [1500, 20, 7]})
    >>> [(p["element"], p["months"], [(n, [str(v) for v in vs]) for n, vs in p["series"]])
    ...  for p in waste_by_stream(frame, ["2026-01", "2026-02", "2026-03"])]
    [('Cd', ['2026-01', '2026-02', '2026-03'], [('aqueous metal', ['1.5', '0', '0.007']), ('halogenated', ['0.02', '0', '0'])])]
    """
    panels: dict[str, dict[str, dict[str, int]]] = {}
    for element, stream, month, ug in frame[["element", "stream", "month", "mass_ug"]].itertuples(index=False):
        if month in months:
            by_month = panels.setdefault(element, {}).setdefault(stream, {})
            by_month[month] = by_month.get(month, 0) + int(ug)
    return [{"element": element,
             "months": list(months),
             "series": [(stream.replace("_", " "), [_mg(by_month.get(m, 0)) for m in months])
                        for stream, by_month in sorted(streams.items())],
             "total_ug": sum(sum(by_month.values()) for by_month in streams.values())}
            for element, streams in panels.items()]


def on_hand_by_lab(frame: pd.DataFrame, elements: Sequence[str]) -> dict:
    """Element mass on hand per lab: the labs (columns) and one row per element of ``elements`` that is on
    hand (in that order) with µg per lab and the total.

    ``frame`` is ``ledger.inventory_on_hand(session, ("element", "lab"))``.

    >>> import pandas as pd
    >>> frame = pd.DataFrame({"element": ["Cd", "Cd", "Se", "H"], "lab": ["L1", "L2", "L2", "L1"], "mass_ug": [5, 7, 9, 1]})
    >>> on_hand_by_lab(frame, ("Se", "Cd", "Te"))
    {'labs': ['L1', 'L2'], 'rows': [{'element': 'Se', 'by_lab': {'L2': 9}, 'total_ug': 9}, \
{'element': 'Cd', 'by_lab': {'L1': 5, 'L2': 7}, 'total_ug': 12}]}
    """
    rows: dict[str, dict[str, int]] = {}
    for element, lab, ug in frame[["element", "lab", "mass_ug"]].itertuples(index=False):
        if element in elements:
            rows.setdefault(element, {})[lab] = rows.get(element, {}).get(lab, 0) + int(ug)
    labs = sorted({lab for by_lab in rows.values() for lab in by_lab})
    return {"labs": labs, "rows": [{"element": element, "by_lab": rows[element], "total_ug": sum(rows[element].values())}
                                   for element in elements if element in rows]}
