"""Engine and sessions; one session per request, committed or rolled back at its end.

Reads and writes open their transactions differently. A session made with ``new_session(factory,
write=False)`` (every GET/HEAD/OPTIONS request, the read-only CLI commands) begins its SQLite
transactions DEFERRED: it takes no lock until it reads, and in WAL mode readers never wait for the
writer nor hold it up. A session made with ``write=True`` (every other request, the CLI commands that
change data, ``session_scope`` by default) is bound to the same engine with the ``WRITE`` execution
option, so each of its transactions begins IMMEDIATE: the write lock is taken before the first
statement, and two writers never both read a container total and then both add to it. A read
session refuses to flush changes (a deferred SQLite transaction that upgrades to a write can fail
with "database is locked" under load). On PostgreSQL the option is inert; rows that must not race
are locked with ``SELECT … FOR UPDATE``.
"""

from __future__ import annotations

from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterator

from sqlalchemy import create_engine, event
from sqlalchemy.engine import Engine

if TYPE_CHECKING:  # the ORM is imported where sessions are made (a command reading Core tables needs none)
    from sqlalchemy.orm import Session, sessionmaker

__all__ = ["WRITE", "ReadOnlySession", "refuse_when_reading", "make_engine", "make_sessionmaker", "new_session",
           "session_scope", "upgrade", "init_app", "get_session", "end_session"]

MIGRATIONS = Path(__file__).with_name("migrations")
# The execution option that marks a writing session's connections (see the module docstring).
WRITE = "dotledger_write"
# Request methods that only read; every other method gets a writing session.
READ_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})


class ReadOnlySession(RuntimeError):
    """A session opened for reading tried to flush changes."""


def make_engine(url: str) -> Engine:
    """An engine for ``url``; SQLite gets foreign keys, WAL and a busy timeout."""
    if url.startswith("sqlite"):
        path = url.split("///", 1)[-1]
        if path and path != ":memory:":
            Path(path).parent.mkdir(parents=True, exist_ok=True)
        engine = create_engine(url, connect_args={"timeout": 30, "check_same_thread": False})

        @event.listens_for(engine, "connect")
        def _sqlite_pragmas(dbapi_connection, _record):  # pragma: no cover - trivial
            # isolation_level=None lets SQLAlchemy's begin hook below issue BEGIN itself.
            dbapi_connection.isolation_level = None
            cursor = dbapi_connection.cursor()
            cursor.execute("PRAGMA foreign_keys=ON")
            cursor.execute("PRAGMA journal_mode=WAL")
            cursor.close()

        @event.listens_for(engine, "begin")
        def _sqlite_begin(conn):  # pragma: no cover - trivial
            # A writing session takes the write lock up front; a reading one takes none.
            conn.exec_driver_sql("BEGIN IMMEDIATE" if conn.get_execution_options().get(WRITE) else "BEGIN")

        return engine
    return create_engine(url, pool_pre_ping=True)


def make_sessionmaker(engine: Engine) -> sessionmaker[Session]:
    """Sessions whose every flush is recorded in the hash-chained audit trail and kept in the monthly totals."""
    from sqlalchemy.orm import sessionmaker

    from service.store import audit, month_totals

    factory = sessionmaker(bind=engine, expire_on_commit=False)
    audit.install(factory)
    month_totals.install(factory)
    event.listen(factory, "before_flush", _refuse_writes_when_reading)
    return factory


def refuse_when_reading(session: Session) -> None:
    """For a write made outside the ORM's flush: refuse it in a session opened for reading."""
    if session.info.get(WRITE) is False:
        raise ReadOnlySession("this session was opened for reading; open it with write=True to change data")


def _refuse_writes_when_reading(session: Session, _flush_context, _instances) -> None:
    if session.info.get(WRITE) is False and (session.new or session.deleted or any(
            session.is_modified(obj) for obj in session.dirty)):
        raise ReadOnlySession("this session was opened for reading; open it with write=True to change data")


def new_session(factory: sessionmaker[Session], *, write: bool) -> Session:
    """A session whose transactions take SQLite's write lock up front (``write=True``) or never."""
    if write:
        session = factory(bind=factory.kw["bind"].execution_options(**{WRITE: True}))
    else:
        session = factory()
    session.info[WRITE] = write
    return session


@contextmanager
def session_scope(factory: sessionmaker[Session], *, write: bool = True) -> Iterator[Session]:
    """A session that commits on success and rolls back on any error (a writing one unless ``write=False``)."""
    session = new_session(factory, write=write)
    try:
        yield session
        session.commit()
    except BaseException:
        session.rollback()
        raise
    finally:
        session.close()


def upgrade(url: str, revision: str = "head") -> None:
    """Bring the database at ``url`` to ``revision`` with alembic."""
    from alembic import command
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    command.upgrade(config, revision)


def init_app(app) -> None:
    """Attach an engine and a per-request session to a Flask app."""
    from flask import g

    engine = make_engine(app.config["DATABASE_URL"])
    app.extensions["dotledger.engine"] = engine
    app.extensions["dotledger.sessions"] = make_sessionmaker(engine)

    @app.after_request
    def _commit(response):
        # Service functions flush (and report conflicts) themselves; a successful
        # answer commits, an error answer leaves nothing behind.
        session = g.get("db_session")
        if session is not None:
            if response.status_code < 400:
                session.commit()
            else:
                session.rollback()
        return response

    @app.teardown_appcontext
    def _close_session(exc):
        session = g.pop("db_session", None)
        if session is not None:
            session.rollback()
            session.close()


def get_session() -> Session:
    """The request's session (created on first use): a writing one unless the method only reads."""
    from flask import current_app, g, has_request_context, request

    if "db_session" not in g:
        write = has_request_context() and request.method not in READ_METHODS
        g.db_session = new_session(current_app.extensions["dotledger.sessions"], write=write)
    return g.db_session


def end_session() -> None:
    """End the request's session now: commit what it wrote and close it.

    For a view whose remaining work needs no database (rendering a document, serialising a
    report), so that no transaction stays open during it. A later ``get_session()`` in the
    same request opens a new session.
    """
    from flask import g

    session = g.pop("db_session", None)
    if session is not None:
        try:
            session.commit()
        finally:
            session.close()
