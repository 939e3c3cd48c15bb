"""The element content of the inventory, change by change (``holding_changes``).

Every function that changes a stock's or mixture's element rows records here, in its own
transaction, one signed row per element: the sum of the rows up to a moment is the element on hand
then, which the site element ledger needs for its opening and closing figures.
"""

from __future__ import annotations

from typing import Mapping, Optional, Union

from sqlalchemy.orm import Session, object_session

from service import vocab
from service.store.models import HoldingChange, Mixture, Stock, utcnow

__all__ = ["record", "content_of", "record_difference"]


def content_of(holder: Union[Stock, Mixture]) -> dict[str, int]:
    """{symbol: µg} the holder's element rows hold now."""
    return {row.element: row.mass_ug for row in holder.elements}


def record(holder: Union[Stock, Mixture], kind: str, masses_ug: Mapping[str, int], *, sign: int,
           session: Optional[Session] = None, run=None, movement=None, into_mixture=None) -> list[HoldingChange]:
    """Record that ``holder`` gained (``sign`` +1) or lost (−1) ``masses_ug``; zero masses are skipped.

    ``run``, ``movement`` and ``into_mixture`` are the records the change belongs to (objects, so that
    rows made before their ids exist are linked at the flush).
    """
    if kind not in vocab.HOLDING_CHANGE_KINDS:
        raise ValueError(f"unknown holding change {kind!r}")
    if sign not in (1, -1):
        raise ValueError("sign is +1 or -1")
    session = session or object_session(holder)
    at = utcnow()
    rows = []
    for element, ug in sorted(masses_ug.items()):
        if not ug:
            continue
        row = HoldingChange(at=at, element=element, mass_ug=sign * int(ug), kind=kind, lab_id=holder.lab_id,
                            run=run, movement=movement, into_mixture=into_mixture)
        if isinstance(holder, Stock):
            row.stock = holder
        else:
            row.mixture = holder
        rows.append(row)
    session.add_all(rows)
    return rows


def record_difference(holder: Union[Stock, Mixture], before: Mapping[str, int], kind: str = "corrected") -> None:
    """Record the change from ``before`` to what the holder's rows hold now (a correction)."""
    after = content_of(holder)
    delta = {e: after.get(e, 0) - before.get(e, 0) for e in set(before) | set(after)}
    gained = {e: d for e, d in delta.items() if d > 0}
    lost = {e: -d for e, d in delta.items() if d < 0}
    if gained:
        record(holder, kind, gained, sign=1)
    if lost:
        record(holder, kind, lost, sign=-1)
