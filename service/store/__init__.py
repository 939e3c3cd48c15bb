"""Persistence: SQLAlchemy 2 models, sessions, queries and alembic migrations.

Nothing is imported here: ``service.store.models`` puts every table (the audit trail's too) on the
metadata, and a module that needs only Core (``service.store.audit_chain``) does not pay for the ORM.
"""
