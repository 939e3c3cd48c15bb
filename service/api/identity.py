"""Account, personal tokens, users (administrators) and the audit trail (auditors)."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.errors import ApiError
from service.api.inventory import json_body
from service.auth import current_user, login_limits
from service.present.identity import dump_event, dump_token, dump_user
from service.store import audit, identity, inventory
from service.store.db import get_session
from service.store.models import ApiToken, User


@bp.post("/auth/tokens", endpoint="issue_token")
def issue_token():
    """Exchange email and password for a new personal token (shown once)."""
    body = json_body(schemas.TokenRequest)
    session = get_session()
    try:
        user = identity.authenticate(session, body.email, body.password.get_secret_value(),
                                     request.remote_addr or "unknown", login_limits())
    except identity.LoginLocked as exc:
        session.commit()  # keep the record of the attempt
        raise ApiError(429, "locked", str(exc), {"retry_after_s": exc.retry_after_s, "scope": exc.scope}) from None
    except identity.BadCredentials as exc:
        session.commit()
        raise ApiError(401, "bad_credentials", str(exc)) from None
    session.info["actor"] = {"user_id": user.id, "label": user.email}
    issued = identity.issue_token(session, user, body.name)
    return jsonify({**dump_token(issued.token), "token": issued.secret,
                    "note": "this token is shown once; store it like a password"}), 201


@bp.get("/me", endpoint="me")
def me():
    return jsonify(dump_user(current_user()))


@bp.get("/tokens", endpoint="list_tokens")
def list_tokens():
    tokens = get_session().query(ApiToken).filter(ApiToken.user_id == current_user().id).order_by(ApiToken.id)
    return jsonify({"items": [dump_token(t) for t in tokens]})


@bp.post("/tokens/<int:ident>/revoke", endpoint="revoke_token")
def revoke_token(ident: int):
    return jsonify(dump_token(identity.revoke_token(get_session(), current_user(), ident)))


@bp.get("/users", endpoint="list_users")
def list_users():
    return jsonify({"items": [dump_user(u) for u in inventory.list_records(get_session(), User, include_retired=True)]})


@bp.post("/users", endpoint="create_users")
def create_user():
    return jsonify(dump_user(identity.create_user(get_session(), json_body(schemas.UserIn)))), 201


@bp.get("/users/<int:ident>", endpoint="read_users")
def read_user(ident: int):
    return jsonify(dump_user(inventory.get(get_session(), User, ident)))


@bp.patch("/users/<int:ident>", endpoint="update_users")
def update_user(ident: int):
    body = json_body(schemas.UserPatch)
    session = get_session()
    return jsonify(dump_user(identity.update_user(session, inventory.get(session, User, ident), body)))


@bp.post("/users/<int:ident>/retire", endpoint="retire_users")
def retire_user(ident: int):
    session = get_session()
    user = inventory.get(session, User, ident)
    if user.id == current_user().id:
        raise ApiError(409, "conflict", "an administrator cannot retire their own account")
    return jsonify(dump_user(inventory.retire(session, user)))


@bp.get("/audit_events", endpoint="list_audit_events")
def list_audit_events():
    query = schemas.AuditQuery.model_validate(request.args.to_dict())
    events = audit.list_events(get_session(), **query.model_dump())
    return jsonify({"items": [dump_event(e) for e in events], "limit": query.limit, "offset": query.offset})
