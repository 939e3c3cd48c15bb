"""Account, personal tokens, users (administrators) and the audit trail (auditors)."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.errors import ApiError
from service.api.inventory import json_body, page_answer
from service.api.responses import AuditEvent, IssuedToken, Token, User as UserAnswer
from service.auth import client_address, current_user, login_limits
from service.operations import operation
from service.present.identity import dump_event, dump_token, dump_user
from service.store import audit, identity, inventory
from service.store.db import get_session
from service.store.models import User


@bp.post("/auth/tokens", endpoint="issue_token")
@operation(body=schemas.TokenRequest, response=IssuedToken, status=201, errors=(401, 429))
def issue_token():
    """Exchange email and password for a new personal token (shown once)."""
    body = json_body(schemas.TokenRequest)
    session = get_session()
    try:
        user = identity.authenticate(session, body.email, body.password.get_secret_value(),
                                     client_address(), login_limits())
    except identity.LoginLocked as exc:
        session.commit()  # keep the record of the attempt
        raise ApiError(429, "locked", str(exc), {"retry_after_s": exc.retry_after_s, "scope": exc.scope},
                       headers={"Retry-After": str(exc.retry_after_s)}) from None
    except identity.BadCredentials as exc:
        session.commit()
        raise ApiError(401, "bad_credentials", str(exc)) from None
    session.info["actor"] = {"user_id": user.id, "label": user.email}
    issued = identity.issue_token(session, user, body.name)
    return jsonify({**dump_token(issued.token), "token": issued.secret,
                    "note": "this token is shown once; store it like a password"}), 201


@bp.get("/me", endpoint="me")
@operation(response=UserAnswer)
def me():
    """The signed-in account."""
    return jsonify(dump_user(current_user()))


@bp.get("/tokens", endpoint="list_tokens")
@operation(query=schemas.PageQuery, response=Token, paged=True)
def list_tokens():
    """One page of the signed-in account's personal tokens."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    page = identity.list_tokens(get_session(), current_user(), limit=query.limit, offset=query.offset)
    return jsonify(page_answer(page, dump_token))


@bp.post("/tokens/<int:ident>/revoke", endpoint="revoke_token")
@operation(response=Token, errors=(409,))
def revoke_token(ident: int):
    """Revoke one of the signed-in account's tokens."""
    return jsonify(dump_token(identity.revoke_token(get_session(), current_user(), ident)))


@bp.get("/users", endpoint="list_users")
@operation(query=schemas.PageQuery, response=UserAnswer, paged=True)
def list_users():
    """One page of the accounts, retired ones included."""
    query = schemas.PageQuery.model_validate(request.args.to_dict())
    page = inventory.list_records(get_session(), User, include_retired=True, limit=query.limit, offset=query.offset)
    return jsonify(page_answer(page, dump_user))


@bp.post("/users", endpoint="create_users")
@operation(body=schemas.UserIn, response=UserAnswer, status=201, errors=(409,))
def create_user():
    """Create an account."""
    return jsonify(dump_user(identity.create_user(get_session(), json_body(schemas.UserIn)))), 201


@bp.get("/users/<int:ident>", endpoint="read_users")
@operation(response=UserAnswer)
def read_user(ident: int):
    """Read an account."""
    return jsonify(dump_user(inventory.get(get_session(), User, ident)))


@bp.patch("/users/<int:ident>", endpoint="update_users")
@operation(body=schemas.UserPatch, response=UserAnswer)
def update_user(ident: int):
    """Change an account's name, role, password or labs."""
    body = json_body(schemas.UserPatch)
    session = get_session()
    return jsonify(dump_user(identity.update_user(session, inventory.get(session, User, ident), body)))


@bp.post("/users/<int:ident>/retire", endpoint="retire_users")
@operation(response=UserAnswer, errors=(409,))
def retire_user(ident: int):
    """Retire an account (not one's own)."""
    session = get_session()
    user = inventory.get(session, User, ident)
    if user.id == current_user().id:
        raise ApiError(409, "conflict", "an administrator cannot retire their own account")
    return jsonify(dump_user(identity.retire_user(session, user)))


@bp.get("/audit_events", endpoint="list_audit_events")
@operation(query=schemas.AuditQuery, response=AuditEvent, paged=True)
def list_audit_events():
    """One page of the audit trail in chain order."""
    query = schemas.AuditQuery.model_validate(request.args.to_dict())
    return jsonify(page_answer(audit.list_events(get_session(), **query.model_dump()), dump_event))
