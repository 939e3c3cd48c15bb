"""The site element ledger as people see it: JSON, a table (CSV/XLSX/terminal), one figure's records."""

from __future__ import annotations

from typing import Iterable, Sequence

import pandas as pd

from service.balance.site import FIGURES, LedgerLine
from service.store.element_ledger import Contribution

__all__ = ["CAUTION", "COLUMNS", "ledger_frame", "dump_ledger", "dump_figure"]

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
