"""Accounts, personal tokens and audit events as people see them (never a password or token hash)."""

from __future__ import annotations

from service.store.audit import AuditEvent
from service.store.models import ApiToken, User

__all__ = ["dump_user", "dump_token", "dump_event"]


def dump_user(record: User) -> dict:
    return {
        "id": record.id,
        "email": record.email,
        "display_name": record.display_name,
        "role": record.role,
        "lab_ids": sorted(record.lab_ids),
        "created_at": record.created_at.isoformat(),
        "retired_at": record.retired_at.isoformat() if record.retired_at else None,
    }


def dump_token(record: ApiToken) -> dict:
    return {
        "id": record.id,
        "name": record.name,
        "prefix": record.prefix,
        "created_at": record.created_at.isoformat(),
        "revoked_at": record.revoked_at.isoformat() if record.revoked_at else None,
    }


def dump_event(record: AuditEvent) -> dict:
    return {
        "id": record.id,
        "at": record.at.isoformat(),
        "actor_user_id": record.actor_user_id,
        "actor_label": record.actor_label,
        "entity": record.entity,
        "entity_id": record.entity_id,
        "action": record.action,
        "before": record.before,
        "after": record.after,
        "prev_hash": record.prev_hash,
        "hash": record.hash,
    }
