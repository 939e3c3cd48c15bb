"""One page of a listing: the records on it and how many match in all, counted in SQL.

Listings take ``limit`` and ``offset``; ``total`` is counted with the same filters as the page
(a ``COUNT(*)`` over the listing's own query), so a reader can tell how many pages there are.
"""

from __future__ import annotations

import dataclasses
from typing import Generic, Iterator, Optional, TypeVar

from sqlalchemy import Select, func, select
from sqlalchemy.orm import Session

__all__ = ["Page", "paginate"]

T = TypeVar("T")


@dataclasses.dataclass(frozen=True)
class Page(Generic[T]):
    """``items`` of one page, ``total`` matching records, the ``limit`` and ``offset`` asked for.

    Iterating, indexing and ``len()`` see the items of this page only.
    """

    items: list[T]
    total: int
    limit: Optional[int]
    offset: int

    def __iter__(self) -> Iterator[T]:
        return iter(self.items)

    def __len__(self) -> int:
        return len(self.items)

    def __getitem__(self, index):
        return self.items[index]

    def with_items(self, items: list) -> "Page":
        """The same page with its items replaced (e.g. records paired with what was computed for them)."""
        return dataclasses.replace(self, items=items)


def paginate(session: Session, query: Select, limit: Optional[int], offset: int = 0) -> Page:
    """The page of ``query`` (already ordered) from ``offset``; ``limit=None`` takes the rest."""
    items = list(session.scalars(query.limit(limit).offset(offset)).unique())
    if offset == 0 and (limit is None or len(items) < limit):
        total = len(items)  # the whole listing fits on this page: no second statement
    else:
        total = session.scalar(select(func.count()).select_from(query.order_by(None).subquery()))
    return Page(items, total, limit, offset)

