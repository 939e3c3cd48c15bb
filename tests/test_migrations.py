"""The alembic migrations build exactly the schema the models declare."""

from __future__ import annotations

import re
from pathlib import Path

from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import inspect, text

from service.store.db import make_engine, upgrade
from service.store.models import Base


def test_head_matches_the_models(database_url):
    upgrade(database_url)
    engine = make_engine(database_url)
    try:
        with engine.connect() as connection:
            context = MigrationContext.configure(connection, opts={"compare_type": True})
            assert compare_metadata(context, Base.metadata) == []
            assert set(Base.metadata.tables) <= set(inspect(connection).get_table_names())
    finally:
        engine.dispose()


VERSIONS = Path(__file__).resolve().parents[1] / "service" / "store" / "migrations" / "versions"


def _head_from_the_files() -> str:
    """The one revision no other revision names as its parent, read from the files as text."""
    revisions, parents = set(), set()
    for path in VERSIONS.glob("*.py"):
        source = path.read_text(encoding="utf-8")
        revisions.add(re.search(r"^revision\s*=\s*['\"]([^'\"]+)['\"]", source, re.M).group(1))
        parents.update(re.findall(r"['\"]([^'\"]+)['\"]", re.search(r"^down_revision\s*=\s*(.*)$", source, re.M).group(1)))
    heads = revisions - parents
    assert len(heads) == 1, f"expected one head, found {sorted(heads)}"
    return heads.pop()


def _snapshot(url: str) -> tuple[list[str], dict[str, list[str]]]:
    engine = make_engine(url)
    try:
        with engine.connect() as connection:
            versions = [row[0] for row in connection.execute(text("SELECT version_num FROM alembic_version"))]
            inspector = inspect(connection)
            columns = {table: sorted(c["name"] for c in inspector.get_columns(table))
                       for table in inspector.get_table_names()}
    finally:
        engine.dispose()
    return versions, columns


def test_upgrade_is_repeatable(sqlite_url):
    upgrade(sqlite_url)
    versions, columns = _snapshot(sqlite_url)
    assert versions == [_head_from_the_files()]
    assert set(Base.metadata.tables) | {"alembic_version"} == set(columns)
    upgrade(sqlite_url)  # already at head: nothing to do, no error
    assert _snapshot(sqlite_url) == (versions, columns)
