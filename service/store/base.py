"""What the tables share, in SQLAlchemy Core alone: the metadata with its naming convention and the column
types that keep UTC times and exact decimals alike on SQLite and PostgreSQL.

The ORM models (``service.store.models``) and the audit trail's tables (``service.store.audit_chain``)
are both on ``metadata``; a module that reads only Core tables imports this one and not the ORM.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal
from typing import Optional

from sqlalchemy import DateTime, MetaData, String, TypeDecorator

__all__ = ["NAMING", "metadata", "utcnow", "UTCDateTime", "ExactDecimal"]


def utcnow() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc)


class UTCDateTime(TypeDecorator):
    """Timezone-aware UTC datetimes on every backend (SQLite keeps no zone)."""

    impl = DateTime
    cache_ok = True

    def process_bind_param(self, value: Optional[dt.datetime], dialect) -> Optional[dt.datetime]:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("naive datetime; use an aware UTC datetime")
        return value.astimezone(dt.timezone.utc).replace(tzinfo=None)

    def process_result_value(self, value: Optional[dt.datetime], dialect) -> Optional[dt.datetime]:
        return None if value is None else value.replace(tzinfo=dt.timezone.utc)


class ExactDecimal(TypeDecorator):
    """A Decimal kept exactly on every backend, as its plain decimal text (SQLite has no exact numeric type)."""

    impl = String(48)
    cache_ok = True

    def process_bind_param(self, value: Optional[Decimal], dialect) -> Optional[str]:
        return None if value is None else f"{Decimal(value).normalize():f}"

    def process_result_value(self, value: Optional[str], dialect) -> Optional[Decimal]:
        return None if value is None else Decimal(value)


NAMING = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


metadata = MetaData(naming_convention=NAMING)
