"""Users, lab memberships, personal API tokens and rate-limited sign-in."""

from __future__ import annotations

import datetime as dt
import hashlib
import secrets
from dataclasses import dataclass
from functools import lru_cache
from typing import Optional

from sqlalchemy import bindparam, func, select
from sqlalchemy.orm import Session
from sqlalchemy.orm.attributes import set_committed_value
from werkzeug.security import check_password_hash, generate_password_hash

from service.errors import Conflict, InvalidInput, NotFound
from service.schemas import UserIn, UserPatch
from service.store import sql
from service.store.inventory import retire
from service.store.models import ApiToken, Lab, LoginAttempt, Membership, User, utcnow
from service.store.paging import Page, paginate

__all__ = [
    "LoginLocked",
    "LoginLimits",
    "IssuedToken",
    "PASSWORD_METHOD",
    "hash_password",
    "create_user",
    "update_user",
    "authenticate",
    "end_sessions",
    "keep_an_admin",
    "retire_user",
    "issue_token",
    "revoke_token",
    "list_tokens",
    "user_for_token",
]

TOKEN_PREFIX = "dlt_"
# werkzeug's default method and cost since 3.0 (scrypt, N = 2**15, r = 8, p = 1), written out so that it is
# one visible setting. A stored hash names its own method and parameters, so hashes made at another cost
# still verify. The test suite lowers the cost (see tests/conftest.py), except where it checks this one.
PASSWORD_METHOD = "scrypt:32768:8:1"


def hash_password(password: str) -> str:
    return generate_password_hash(password, method=PASSWORD_METHOD)


class LoginLocked(PermissionError):
    """Too many failed sign-ins for this account or address; carries the wait in seconds."""

    def __init__(self, retry_after_s: int, scope: str) -> None:
        self.retry_after_s = retry_after_s
        self.scope = scope
        minutes = max(1, round(retry_after_s / 60))
        super().__init__(f"too many failed sign-ins for this {scope}; try again in about {minutes} minute(s)")


class BadCredentials(PermissionError):
    def __init__(self) -> None:
        super().__init__("unknown email or wrong password")


@dataclass(frozen=True)
class LoginLimits:
    max_failures_per_account: int = 5
    max_failures_per_address: int = 20
    window_s: int = 900


@dataclass(frozen=True)
class IssuedToken:
    token: ApiToken
    secret: str  # shown once, never stored


def _set_labs(session: Session, user: User, lab_ids: list[int]) -> None:
    for lab_id in lab_ids:
        lab = session.get(Lab, lab_id)
        if lab is None or lab.retired_at is not None:
            raise InvalidInput("lab_ids", f"no active lab with id {lab_id}", lab_id)
    user.memberships = [Membership(lab_id=lab_id) for lab_id in sorted(set(lab_ids))]


def create_user(session: Session, body: UserIn) -> User:
    email = body.email.lower()
    if session.scalar(select(User.id).where(func.lower(User.email) == email)) is not None:
        raise Conflict(f"a user with email {email!r} exists", "email", email)
    user = User(email=email, display_name=body.display_name, role=body.role,
                password_hash=hash_password(body.password.get_secret_value()))
    _set_labs(session, user, body.lab_ids)
    session.add(user)
    session.flush()
    return user


def update_user(session: Session, user: User, patch: UserPatch) -> User:
    values = patch.model_dump(exclude_unset=True)
    if values.get("role", "admin") != "admin" and user.role == "admin":
        keep_an_admin(session, user, "demoted")
    if "password" in values:
        values.pop("password")
        user.password_hash = hash_password(patch.password.get_secret_value())
        # Whoever held the old password may hold a session or a token: end them all.
        end_sessions(user)
        revoke_all_tokens(session, user)
    if "lab_ids" in values:
        _set_labs(session, user, values.pop("lab_ids") or [])
    for key, value in values.items():
        setattr(user, key, value)
    session.flush()
    return user


def keep_an_admin(session: Session, user: User, change: str) -> None:
    """409 when ``user`` is the last active administrator (who would then be ``change``).

    The other administrators' rows are locked (PostgreSQL), so that two administrators demoting
    each other at once cannot both succeed; SQLite transactions are serial already.
    """
    others = session.scalars(
        select(User.id).where(User.role == "admin", User.retired_at.is_(None), User.id != user.id).with_for_update()
    ).all()
    if user.role == "admin" and user.retired_at is None and not others:
        raise Conflict(f"{user.email} is the last active administrator and cannot be {change}; "
                       "make another account an administrator first", "role", user.role)


def retire_user(session: Session, user: User) -> User:
    """Retire an account, keeping at least one administrator; its sessions and tokens end with it."""
    keep_an_admin(session, user, "retired")
    retire(session, user)
    end_sessions(user)
    revoke_all_tokens(session, user)
    return user


def end_sessions(user: User) -> None:
    """Make every session cookie issued to ``user`` so far stop working."""
    user.session_version = (user.session_version or 0) + 1


def revoke_all_tokens(session: Session, user: User) -> None:
    now = utcnow()
    for token in session.scalars(select(ApiToken).where(ApiToken.user_id == user.id, ApiToken.revoked_at.is_(None))):
        token.revoked_at = now
    session.flush()


@lru_cache(maxsize=4)
def _dummy_hash(method: str) -> str:
    """A hash of a random password made as real ones are (same method and cost), checked for unknown emails."""
    return generate_password_hash(secrets.token_urlsafe(16), method=method)


def _locked_until(session: Session, column, value: str, limit: int, window_s: int, now: dt.datetime):
    """When the lock on ``value`` lifts, or None if fewer than ``limit`` failures are in the window.

    The lock lifts when the ``limit``-th most recent failure leaves the window.
    """
    query = (
        select(LoginAttempt.at)
        .where(column == value, LoginAttempt.succeeded.is_(False), LoginAttempt.at >= now - dt.timedelta(seconds=window_s))
        .order_by(LoginAttempt.at.desc())
        .offset(limit - 1)
        .limit(1)
    )
    oldest_counted = session.scalar(query)
    return None if oldest_counted is None else oldest_counted + dt.timedelta(seconds=window_s)


def authenticate(session: Session, email: str, password: str, address: str, limits: LoginLimits) -> User:
    """The active user with this email and password, recording the attempt.

    Raises LoginLocked before checking the password when the account or the address has
    too many recent failures, and BadCredentials for a wrong email or password.
    """
    email = (email or "").strip().lower()
    now = utcnow()
    for column, value, limit, scope in (
        (LoginAttempt.email, email, limits.max_failures_per_account, "account"),
        (LoginAttempt.address, address, limits.max_failures_per_address, "address"),
    ):
        until = _locked_until(session, column, value, limit, limits.window_s, now)
        if until is not None:
            raise LoginLocked(max(1, int((until - now).total_seconds()) + 1), scope)
    user = session.scalar(select(User).where(User.email == email))
    # Always one hash check, so that an unknown email takes as long to refuse as a wrong password.
    matches = check_password_hash(user.password_hash if user is not None else _dummy_hash(PASSWORD_METHOD),
                                  password or "")
    ok = user is not None and user.retired_at is None and matches
    session.add(LoginAttempt(email=email, address=address, at=now, succeeded=ok))
    session.flush()
    if not ok:
        raise BadCredentials()
    return user


def _digest(secret: str) -> str:
    return hashlib.sha256(secret.encode()).hexdigest()


def issue_token(session: Session, user: User, name: str) -> IssuedToken:
    """A new personal token for ``user``; the secret is returned once and only its hash kept."""
    secret = TOKEN_PREFIX + secrets.token_urlsafe(32)
    token = ApiToken(user_id=user.id, name=name, prefix=secret[: len(TOKEN_PREFIX) + 6], token_hash=_digest(secret))
    session.add(token)
    session.flush()
    return IssuedToken(token, secret)


def revoke_token(session: Session, user: User, token_id: int) -> ApiToken:
    token = session.get(ApiToken, token_id)
    if token is None or token.user_id != user.id:
        raise NotFound("token", token_id)
    if token.revoked_at is not None:
        raise Conflict(f"token {token_id} is already revoked")
    token.revoked_at = utcnow()
    session.flush()
    return token


def list_tokens(session: Session, user: User, *, limit: Optional[int] = None, offset: int = 0) -> Page:
    """A page of ``user``'s tokens in the order they were issued."""
    return paginate(session, select(ApiToken).where(ApiToken.user_id == user.id).order_by(ApiToken.id), limit, offset)


def user_for_token(session: Session, secret: str) -> Optional[User]:
    """The active user owning an unrevoked token, or None."""
    if not secret.startswith(TOKEN_PREFIX):
        return None
    # One Core statement: the token's user with its memberships (what the request's lab scope reads), one row
    # per membership; they join the session as the ORM would have loaded them (sql.as_loaded).
    rows = session.connection().execute(_token_user(), {"digest": _digest(secret)}).mappings().all()
    if not rows:
        return None
    user = sql.as_loaded(session, User, rows[0])
    if "memberships" not in user.__dict__:
        memberships = [sql.as_loaded(session, Membership, {"user_id": user.id, "lab_id": row["membership_lab_id"]})
                       for row in rows if row["membership_lab_id"] is not None]
        set_committed_value(user, "memberships", memberships)
    return user


@lru_cache(maxsize=None)
def _token_user():
    """The statement of :func:`user_for_token`, built once."""
    return (select(*User.__table__.columns, Membership.lab_id.label("membership_lab_id"))
            .join(ApiToken, ApiToken.user_id == User.id)
            .outerjoin(Membership, Membership.user_id == User.id)
            .where(ApiToken.token_hash == bindparam("digest"), ApiToken.revoked_at.is_(None), User.retired_at.is_(None))
            .order_by(Membership.lab_id))
