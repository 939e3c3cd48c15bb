"""Text cells made safe to open in a spreadsheet (CSV and XLSX exports, the rejected-rows report).

A spreadsheet program reads a cell that starts with ``=``, ``+``, ``-`` or ``@`` as a formula, and
a leading tab or carriage return can hide such a start; an imported label like
``=HYPERLINK("http://…")`` or ``+cmd|' /C calc'!A0`` would otherwise come back out as a live
formula. Such text cells get a leading single quote, as the OWASP "CSV Injection" page advises;
numbers (and text that is just a plain number, like a basement room "-1") are left as they are.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pandas is imported where a table is made (a slow import; most commands make none)
    import pandas as pd

__all__ = ["FORMULA_STARTS", "neutralise_cell", "neutralise_frame"]

# The characters a formula may start with, from the OWASP "CSV Injection" page (from memory):
# equals, plus, minus, at sign, tab (0x09), carriage return (0x0D).
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[+-]?\d+(\.\d+)?")


def neutralise_cell(value: Any) -> Any:
    """``value`` with a leading ``'`` when it is text a spreadsheet would read as a formula.

    Anything that is not a ``str`` (numbers, dates, missing values) is returned unchanged.

    >>> neutralise_cell('=HYPERLINK("x")')
    '\\'=HYPERLINK("x")'
    >>> neutralise_cell("-2+3"), neutralise_cell("-1"), neutralise_cell(-2), neutralise_cell("C-214")
    ("'-2+3", '-1', -2, 'C-214')
    """
    if isinstance(value, str) and value.startswith(FORMULA_STARTS) and not _PLAIN_NUMBER.fullmatch(value):
        return "'" + value
    return value


def neutralise_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``frame`` with every text cell (and column name) passed through ``neutralise_cell``."""
    import pandas as pd

    safe = frame.rename(columns=neutralise_cell)
    for column in safe.columns:
        if not pd.api.types.is_numeric_dtype(safe[column]):
            safe[column] = safe[column].map(neutralise_cell)
    return safe
