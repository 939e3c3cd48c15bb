"""Persistence: SQLAlchemy 2 models, sessions, queries and alembic migrations."""

# Importing both puts every table (the audit trail's too) on Base.metadata.
from service.store import audit, models  # noqa: E402,F401
