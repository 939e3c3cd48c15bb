"""The alembic migrations build exactly the schema the models declare."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.migration import MigrationContext
from sqlalchemy import inspect

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


def test_upgrade_is_repeatable(sqlite_url):
    upgrade(sqlite_url)
    upgrade(sqlite_url)  # already at head: nothing to do, no error
