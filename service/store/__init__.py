"""Persistence: SQLAlchemy 2 models, sessions, queries and alembic migrations."""
