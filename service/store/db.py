"""Engine and sessions; one session per request, committed or rolled back at its end."""

from __future__ import annotations

from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from sqlalchemy import create_engine, event
from sqlalchemy.engine import Engine
from sqlalchemy.orm import Session, sessionmaker

__all__ = ["make_engine", "make_sessionmaker", "session_scope", "upgrade", "init_app", "get_session", "end_session"]

MIGRATIONS = Path(__file__).with_name("migrations")


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
            # An immediate transaction takes the write lock up front, so two writers
            # never both read a container total and then both add to it.
            conn.exec_driver_sql("BEGIN IMMEDIATE")

        return engine
    return create_engine(url, pool_pre_ping=True)


def make_sessionmaker(engine: Engine) -> sessionmaker[Session]:
    """Sessions whose every flush is recorded in the hash-chained audit trail."""
    from service.store import audit

    factory = sessionmaker(bind=engine, expire_on_commit=False)
    audit.install(factory)
    return factory


@contextmanager
def session_scope(factory: sessionmaker[Session]) -> Iterator[Session]:
    """A session that commits on success and rolls back on any error."""
    session = factory()
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
    """The request's session (created on first use)."""
    from flask import current_app, g

    if "db_session" not in g:
        g.db_session = current_app.extensions["dotledger.sessions"]()
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
