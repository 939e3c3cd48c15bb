"""Answers kept for API writes sent with an ``Idempotency-Key`` header (see service.api.idempotency)."""

from __future__ import annotations

import hashlib
from typing import Optional

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.store.models import IdempotencyKey

__all__ = ["request_digest", "find", "save"]


def request_digest(method: str, path: str, body: bytes) -> str:
    """What makes two requests the same request: method, path and body bytes."""
    digest = hashlib.sha256()
    for part in (method.encode(), path.encode(), body):
        digest.update(len(part).to_bytes(8, "big"))
        digest.update(part)
    return digest.hexdigest()


def find(session: Session, user_id: int, key: str) -> Optional[IdempotencyKey]:
    return session.scalar(select(IdempotencyKey).where(IdempotencyKey.user_id == user_id, IdempotencyKey.key == key))


def save(session: Session, user_id: int, key: str, request_sha256: str, *, status: int, content_type: str,
         location: Optional[str], body: str) -> None:
    """Keep the answer in the session's transaction (the write's own); flushes, so a duplicate key raises here."""
    session.add(IdempotencyKey(user_id=user_id, key=key, request_sha256=request_sha256, status=status,
                               content_type=content_type, location=location, body=body))
    session.flush()
