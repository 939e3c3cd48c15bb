"""Online, consistent copies of the database, restored into an empty one.

SQLite is copied page by page with its backup API (``sqlite3.Connection.backup``), which reads one
consistent snapshot while the server keeps writing. PostgreSQL is dumped with ``pg_dump`` (custom
format) of the database's schema under a snapshot this module exports, and the audit head is read
under the same snapshot: the head hash reported for a backup is exactly the one inside it.

A restore goes only into an empty database (no tables in the target schema) unless forced; the
restored copy's audit chain is verified before the restore is reported done.
"""

from __future__ import annotations

import os
import shutil
import sqlite3
import subprocess
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from sqlalchemy import create_engine, inspect, text
from sqlalchemy.engine import URL, make_url

from service.store import audit
from service.store.db import make_engine, make_sessionmaker, session_scope

__all__ = ["BackupError", "BackupResult", "backup", "restore", "head_file", "verify"]


class BackupError(RuntimeError):
    """A backup or restore that cannot proceed; the message says why and what to do."""


@dataclass(frozen=True)
class BackupResult:
    path: Path
    head_hash: str
    last_event_id: int


def head_file(path: Path) -> Path:
    """Where the audit head hash of the backup at ``path`` is written (``PATH.head``)."""
    return path.with_name(path.name + ".head")


def _sqlite_path(url: URL) -> Path:
    if not url.database or url.database == ":memory:":
        raise BackupError("an in-memory SQLite database has nothing to back up")
    return Path(url.database)


def _schema(url: URL) -> str:
    """The schema a PostgreSQL URL works in: its ``options=-csearch_path=…``, else ``public``."""
    options = url.query.get("options", "")
    options = options if isinstance(options, str) else " ".join(options)
    for option in options.split():
        if option.startswith("-csearch_path="):
            return option.split("=", 1)[1].split(",")[0].strip('"')
    return "public"


def _libpq(url: URL) -> tuple[list[str], dict]:
    """Connection arguments and environment for pg_dump/pg_restore (the password via PGPASSWORD)."""
    args = ["--dbname", url.database or "postgres"]
    if url.host:
        args += ["--host", url.host]
    if url.port:
        args += ["--port", str(url.port)]
    if url.username:
        args += ["--username", url.username]
    env = dict(os.environ)
    if url.password:
        env["PGPASSWORD"] = url.password
    return args, env


def _tool(name: str) -> str:
    found = shutil.which(name)
    if found is None:
        raise BackupError(f"{name} is not installed (Debian package postgresql-client); it is needed for PostgreSQL")
    return found


def _run(command: list[str], env: dict) -> None:
    done = subprocess.run(command, env=env, capture_output=True, text=True)
    if done.returncode != 0:
        raise BackupError(f"{Path(command[0]).name} failed: {done.stderr.strip() or done.returncode}")


def _head(connection) -> tuple[int, str]:
    row = connection.execute(text("SELECT last_event_id, last_hash FROM audit_head WHERE id = 1")).one_or_none()
    if row is None:
        raise BackupError("the database has no audit head; is it a dotledger database (dotledger init)?")
    return row[0], row[1]


def backup(database_url: str, path: Path, *, force: bool = False) -> BackupResult:
    """Copy the database at ``database_url`` to ``path`` and write the audit head hash to ``PATH.head``."""
    if path.exists() and not force:
        raise BackupError(f"{path} exists; choose a new file (or --force to replace it)")
    url = make_url(database_url)
    if url.get_backend_name() == "sqlite":
        last_id, last_hash = _backup_sqlite(_sqlite_path(url), path)
    elif url.get_backend_name() == "postgresql":
        last_id, last_hash = _backup_postgres(url, path)
    else:
        raise BackupError(f"no backup method for {url.get_backend_name()}")
    head_file(path).write_text(f"{last_hash}\n", encoding="ascii")
    return BackupResult(path, last_hash, last_id)


def _backup_sqlite(source: Path, path: Path) -> tuple[int, str]:
    if not source.is_file():
        raise BackupError(f"no database at {source}")
    partial = path.with_name(path.name + ".partial")
    partial.unlink(missing_ok=True)
    src = sqlite3.connect(f"file:{source}?mode=ro", uri=True)
    dst = sqlite3.connect(partial)
    try:
        src.backup(dst)
        dst.execute("PRAGMA journal_mode=DELETE")  # one self-contained file, no -wal beside it
        row = dst.execute("SELECT last_event_id, last_hash FROM audit_head WHERE id = 1").fetchone()
    except sqlite3.Error as exc:
        raise BackupError(f"the SQLite backup failed: {exc}") from exc
    finally:
        dst.close()
        src.close()
    if row is None:
        partial.unlink(missing_ok=True)
        raise BackupError("the database has no audit head; is it a dotledger database (dotledger init)?")
    os.replace(partial, path)
    return row[0], row[1]


def _backup_postgres(url: URL, path: Path) -> tuple[int, str]:
    pg_dump = _tool("pg_dump")
    args, env = _libpq(url)
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            # One snapshot for the dump and the head read (the transaction stays open while pg_dump runs).
            connection.exec_driver_sql("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ, READ ONLY")
            snapshot = connection.execute(text("SELECT pg_export_snapshot()")).scalar_one()
            head = _head(connection)
            _run([pg_dump, *args, "--format=custom", "--no-owner", "--no-privileges", f"--schema={_schema(url)}",
                  f"--snapshot={snapshot}", f"--file={path}"], env)
            connection.rollback()
    finally:
        engine.dispose()
    return head


def _is_empty(database_url: str) -> bool:
    url = make_url(database_url)
    if url.get_backend_name() == "sqlite" and not _sqlite_path(url).exists():
        return True
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            schema = _schema(url) if url.get_backend_name() == "postgresql" else None
            return not inspect(connection).get_table_names(schema=schema)
    finally:
        engine.dispose()


def restore(path: Path, database_url: str, *, force: bool = False) -> audit.ChainReport:
    """Load the backup at ``path`` into the database at ``database_url`` and verify its audit chain."""
    if not path.is_file():
        raise BackupError(f"no backup at {path}")
    if not _is_empty(database_url) and not force:
        raise BackupError("the target database is not empty; restore into an empty one (or --force to replace it)")
    url = make_url(database_url)
    if url.get_backend_name() == "sqlite":
        _restore_sqlite(path, _sqlite_path(url))
    elif url.get_backend_name() == "postgresql":
        _restore_postgres(path, url)
    else:
        raise BackupError(f"no restore method for {url.get_backend_name()}")
    return verify(database_url)


def _restore_sqlite(path: Path, target: Path) -> None:
    target.parent.mkdir(parents=True, exist_ok=True)
    src = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    dst = sqlite3.connect(target)
    try:
        if src.execute("SELECT 1 FROM sqlite_master WHERE name = 'audit_head'").fetchone() is None:
            raise BackupError(f"{path} is not a dotledger backup (no audit head)")
        src.backup(dst)  # replaces every page of the target, in one step for other readers
    except sqlite3.DatabaseError as exc:
        raise BackupError(f"{path} is not a SQLite backup: {exc}") from exc
    finally:
        dst.close()
        src.close()


def _dumped_schemas(pg_restore: str, path: Path, env: dict) -> set[str]:
    done = subprocess.run([pg_restore, "--list", str(path)], env=env, capture_output=True, text=True)
    if done.returncode != 0:
        raise BackupError(f"{path} is not a pg_dump archive: {done.stderr.strip()}")
    # Table of contents lines: "id; oid oid TYPE SCHEMA NAME OWNER"; a schema entry reads "SCHEMA - name".
    return {line.split()[5] for line in done.stdout.splitlines()
            if not line.startswith(";") and len(line.split()) > 5 and line.split()[3] == "SCHEMA"}


def _restore_postgres(path: Path, url: URL) -> None:
    pg_restore = _tool("pg_restore")
    args, env = _libpq(url)
    schema = _schema(url)
    dumped = _dumped_schemas(pg_restore, path, env)
    if dumped and schema not in dumped:
        raise BackupError(f"the backup holds schema {', '.join(sorted(dumped))}, the target URL works in {schema}: "
                          "restore into a database whose search_path names the backup's schema")
    engine = create_engine(url)
    try:
        with engine.begin() as connection:  # empty, or emptied under --force: made again from the backup
            connection.execute(text(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE'))
            if schema not in dumped:  # an archive without the schema's own entry
                connection.execute(text(f'CREATE SCHEMA "{schema}"'))
    finally:
        engine.dispose()
    _run([pg_restore, *args, "--no-owner", "--no-privileges", "--single-transaction", "--exit-on-error", str(path)],
         env)


def verify(database_url: str) -> audit.ChainReport:
    engine = make_engine(database_url)
    try:
        with session_scope(make_sessionmaker(engine), write=False) as session:
            return audit.verify_chain(session)
    finally:
        engine.dispose()
