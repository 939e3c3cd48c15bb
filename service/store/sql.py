"""What the store's hot paths share: prebuilt INSERTs, an adding upsert, and statements sent without waiting
for each answer.

Imports nothing of the store, so ``db``, ``audit`` and ``month_totals`` can all use it.
"""

from __future__ import annotations

import functools
from contextlib import contextmanager
from typing import Iterator

from sqlalchemy import insert
from sqlalchemy.exc import DBAPIError

__all__ = ["inserting", "adding", "sent_together"]


@functools.cache
def inserting(table, returning: str | None = None):
    """An INSERT into ``table`` built once (its columns are the parameters given; ``returning``: the
    column it answers with)."""
    statement = insert(table)
    return statement if returning is None else statement.returning(table.c[returning])


@functools.cache
def adding(dialect: str, table):
    """INSERT into ``table``, or where its key is there already add each other column to the stored value
    (``ON CONFLICT … DO UPDATE SET x = x + excluded.x``; SQLite and PostgreSQL), built once per table.
    The dialect's module is imported here: a process on SQLite never loads PostgreSQL's (about 40 ms of a start)."""
    from importlib import import_module

    statement = import_module(f"sqlalchemy.dialects.{'sqlite' if dialect == 'sqlite' else 'postgresql'}").insert(table)
    keys = [column.name for column in table.primary_key.columns]
    return statement.on_conflict_do_update(
        index_elements=keys, set_={column.name: column + statement.excluded[column.name]
                                   for column in table.columns if column.name not in keys})


@contextmanager
def sent_together(connection) -> Iterator[None]:
    """Statements executed inside go to the server without waiting for each answer (psycopg's pipeline
    mode on PostgreSQL: one round trip for the lot); elsewhere they run one by one as usual.

    Only for statements whose results are not read (INSERT, UPDATE without RETURNING): inside the block
    a statement's rows are not there yet. An INSERT must give the row's key: SQLAlchemy reads back a key
    the database makes (RETURNING on PostgreSQL). A database error of any of them is raised at the end
    of the block as SQLAlchemy's own exception (an IntegrityError is one still); the transaction fails.
    """
    if connection.dialect.driver != "psycopg":
        yield
        return
    import psycopg  # the PostgreSQL driver, there only

    if not psycopg.Pipeline.is_supported():  # libpq before 14
        yield
        return
    try:
        with connection.connection.driver_connection.pipeline():
            yield
    except psycopg.Error as exc:
        raise DBAPIError.instance(None, None, exc, psycopg.Error) from exc
