"""``Idempotency-Key``: a client that retries a write after a lost answer gets the first answer again.

Every POST and PATCH of the ``api`` blueprint accepts the header. The first request with a key runs
as usual; when it succeeds, its status, body and ``Location`` are saved under (user, key) in the same
transaction as the write, so the key is kept exactly when the write is. A repeat with the same key,
method, path and body answers the saved result and records nothing; the same key with a different
request answers 422 naming the header. A request that failed kept nothing, so its retry runs again.
Requests without a signed-in user (the token request) ignore the header.
"""

from __future__ import annotations

from flask import Blueprint, Response, current_app, g, request
from sqlalchemy.exc import IntegrityError

from service.api.errors import ApiError, error_response
from service.auth import current_user
from service.store import idempotency
from service.store.db import get_session

__all__ = ["HEADER", "KEY_MAX_CHARS", "METHODS", "install"]

HEADER = "Idempotency-Key"
KEY_MAX_CHARS = 200
METHODS = frozenset({"POST", "PATCH"})
_PENDING = "idempotency_pending"


def _problem(status: int, code: str, message: str) -> ApiError:
    return ApiError(status, code, message, [{"field": HEADER, "message": message}])


def _key() -> str | None:
    key = request.headers.get(HEADER)
    if key is None:
        return None
    if not 1 <= len(key) <= KEY_MAX_CHARS or not all(" " < ch <= "~" for ch in key):
        raise _problem(422, "invalid_idempotency_key",
                       f"the {HEADER} header must be 1 to {KEY_MAX_CHARS} visible ASCII characters")
    return key


def _replay_or_note():
    user = current_user()
    if request.method not in METHODS or user is None:
        return None
    key = _key()
    if key is None:
        return None
    digest = idempotency.request_digest(request.method, request.path, request.get_data(cache=True))
    kept = idempotency.find(get_session(), user.id, key)
    if kept is None:
        g.setdefault(_PENDING, (user.id, key, digest))
        return None
    if kept.request_sha256 != digest:
        raise _problem(422, "idempotency_key_reused",
                       f"this {HEADER} was used for a different request; send a new key for a new request")
    answer = Response(kept.body, status=kept.status, content_type=kept.content_type)
    if kept.location:
        answer.headers["Location"] = kept.location
    answer.headers["Idempotent-Replayed"] = "true"
    return answer


def _keep(response: Response) -> Response:
    pending = g.pop(_PENDING, None)
    if pending is None or response.status_code >= 400:
        return response
    user_id, key, digest = pending
    try:
        idempotency.save(get_session(), user_id, key, digest, status=response.status_code,
                         content_type=response.content_type or "application/json",
                         location=response.headers.get("Location"), body=response.get_data(as_text=True))
    except IntegrityError:  # the same key, sent twice at once: the other request holds it
        current_app.logger.info("%s %r sent concurrently; the later request is refused", HEADER, key)
        return error_response(409, "idempotency_key_in_use",
                              f"a request with this {HEADER} is being recorded; retry it to get its answer",
                              [{"field": HEADER, "message": "in use by a concurrent request"}])
    return response


def install(bp: Blueprint) -> None:
    """Answer repeats before the view runs; keep first answers after it (before the request's commit)."""
    bp.before_request(_replay_or_note)
    bp.after_request(_keep)
