"""What the store's hot paths share: prebuilt INSERTs, an adding upsert, statements sent without waiting
for each answer, and rows written or read with Core statements joining the session as ORM objects.

Imports nothing of the store, so ``db``, ``audit`` and ``month_totals`` can all use it.
"""

from __future__ import annotations

import functools
from contextlib import contextmanager
from typing import Any, Iterator, Mapping, TypeVar

from sqlalchemy import insert
from sqlalchemy.exc import DBAPIError
from sqlalchemy.orm import Session, make_transient_to_detached
from sqlalchemy.orm.attributes import set_committed_value

__all__ = ["inserting", "adding", "sent_together", "loaded", "as_loaded"]

T = TypeVar("T")


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


def loaded(session: Session, *objects) -> None:
    """Objects whose rows were just written or read with Core statements join the session as if loaded by it
    (every column set; nothing left for a flush to write; relationships not set load when first used)."""
    for obj in objects:
        for column in type(obj).__table__.columns:  # an unset column would be left expired, to be read back
            if column.name not in obj.__dict__:
                setattr(obj, column.name, None)
        make_transient_to_detached(obj)
    session.add_all(objects)


def as_loaded(session: Session, model: type[T], values: Mapping[str, Any], *, prefix: str = "",
              refresh: bool = False) -> T:
    """The ``model`` object of a row read with a Core statement (``values``: its columns by name, each after
    ``prefix``): the one the session holds already for that key, else a new one joining it as loaded
    (:func:`loaded`). ``refresh`` sets a held object's columns to the row's, as the ORM's
    ``populate_existing`` does (a row read under its lock is the current one).

    What a query through the ORM would answer, without its per-row machinery (a few times a Core read's
    cost for one row); for the hot reads of a request (its caller, the container it locks, an entry's substances).
    """
    table = model.__table__
    key = session.identity_key(model, tuple(values[prefix + column.name] for column in table.primary_key.columns))
    held = session.identity_map.get(key)
    if held is not None:
        if refresh:
            for column in table.columns:
                set_committed_value(held, column.name, values[prefix + column.name])
        return held
    # as the ORM's loading makes it: an instance without __init__, its columns set as committed values
    obj = model.__mapper__.class_manager.new_instance()
    obj.__dict__.update({column.name: values[prefix + column.name] for column in table.columns})
    loaded(session, obj)
    return obj
