"""Who is asking, and may they: sign-in sessions, bearer tokens, the matrix, CSRF.

Pages use a signed session cookie (HttpOnly, SameSite=Lax) and a CSRF token on every
form; the API uses personal bearer tokens only, so a browser's cookie never authorises
an API call. Every request is checked against ``service.permissions`` before its view.
"""

from __future__ import annotations

import hmac
import secrets
from typing import Optional

from flask import Flask, current_app, g, redirect, request, session, url_for
from sqlalchemy.orm import joinedload

from service.errors import CsrfFailed, Forbidden, Unauthenticated
from service.operations import is_api_path
from service.permissions import LAB_SCOPED_ROLES, MATRIX, PUBLIC
from service.store import identity
from service.store.db import get_session
from service.store.models import User

__all__ = ["init_app", "client_address", "current_user", "identify_for_page", "csrf_token", "lab_scope", "check_lab", "sign_in", "sign_out", "login_limits"]


def current_user() -> Optional[User]:
    return g.get("user")


def lab_scope() -> Optional[set[int]]:
    """The lab ids the current user is limited to, or None for site-wide roles."""
    user = current_user()
    return user.lab_ids if user is not None and user.role in LAB_SCOPED_ROLES else None


def check_lab(lab_id: Optional[int]) -> None:
    """403 unless the current user may act on records of ``lab_id``."""
    scope = lab_scope()
    if scope is not None and lab_id not in scope:
        raise Forbidden("this record belongs to a lab you are not a member of", {"lab_id": lab_id})


def csrf_token() -> str:
    if "csrf" not in session:
        session["csrf"] = secrets.token_urlsafe(32)
    return session["csrf"]


def sign_in(user: User) -> None:
    session.clear()
    session["user_id"] = user.id
    # The cookie is good while the account's version stays; sign-out and a new password raise it.
    session["session_version"] = user.session_version
    session["csrf"] = secrets.token_urlsafe(32)


def sign_out() -> None:
    """End this browser's session and every other copy of its cookie."""
    user = current_user()
    if user is not None:
        identity.end_sessions(user)
    session.clear()


def _identify() -> Optional[User]:
    db = get_session()
    if is_api_path(request.path):
        header = request.headers.get("Authorization", "")
        scheme, _, secret = header.partition(" ")
        if scheme.lower() != "bearer" or not secret:
            return None
        return identity.user_for_token(db, secret.strip())
    user_id = session.get("user_id")
    # one statement: the user with the memberships the lab scope reads
    user = db.get(User, user_id, options=[joinedload(User.memberships)]) if isinstance(user_id, int) else None
    if user is None or user.retired_at is not None or session.get("session_version") != user.session_version:
        return None
    return user


def identify_for_page() -> Optional[User]:
    """The signed-in user of a page answer that the check before the view did not reach.

    An unknown address (404/405) or a refused form token answers before ``_authorize``
    identifies the caller; the error page still shows who is signed in. Identifying only
    reads the session cookie; it grants nothing.
    """
    if "user" not in g and not is_api_path(request.path):
        user = _identify()
        if user is not None:
            g.user = user
    return current_user()


def _authorize():
    endpoint = request.endpoint
    if endpoint is None:  # no such route: the 404/405 handler answers
        return None
    is_page = not is_api_path(request.path)
    if is_page and request.method == "POST":
        sent = request.form.get("csrf_token", "")
        if not sent or not hmac.compare_digest(sent, session.get("csrf", "")):
            raise CsrfFailed("the form is missing its security token or it has expired; reload and retry")
    user = _identify()
    if user is not None:
        g.user = user
        get_session().info["actor"] = {"user_id": user.id, "label": user.email}
        get_session().info["lab_scope"] = lab_scope()  # what the store lets this request refer to
    if endpoint in PUBLIC:
        return None
    if user is None:
        if is_page:
            return redirect(url_for("web.login", next=request.full_path))
        raise Unauthenticated("sign in or send a personal token: Authorization: Bearer <token>")
    roles = MATRIX.get(endpoint)
    if roles is None or user.role not in roles:
        raise Forbidden(f"the role {user.role!r} may not do this", {"endpoint": endpoint})
    return None


# Every answer, pages and API alike. Styles may be inline (the bar charts set their widths in a
# style attribute); scripts, frames, plugins and form targets only from this server.
SECURITY_HEADERS = {
    "Content-Security-Policy": "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
                               "img-src 'self' data:; object-src 'none'; base-uri 'self'; form-action 'self'; "
                               "frame-ancestors 'none'",
    "X-Frame-Options": "DENY",
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "same-origin",
}


def _security_headers(response):
    for name, value in SECURITY_HEADERS.items():
        response.headers.setdefault(name, value)
    return response


def init_app(app: Flask) -> None:
    app.config["SESSION_COOKIE_HTTPONLY"] = True
    app.config["SESSION_COOKIE_SAMESITE"] = "Lax"
    app.config["SESSION_COOKIE_SECURE"] = bool(app.config.get("SECURE_COOKIES"))
    app.before_request(_authorize)
    app.after_request(_security_headers)
    app.jinja_env.globals["csrf_token"] = csrf_token
    app.jinja_env.globals["current_user"] = current_user


def client_address() -> str:
    """The address sign-in limits count by: the peer, or the client that ``TRUSTED_PROXIES`` proxies name."""
    return (request.remote_addr or "unknown")[:64]  # the column's length


def login_limits() -> identity.LoginLimits:
    """The sign-in limits the settings give (API token requests and the sign-in page share them)."""
    config = current_app.config
    return identity.LoginLimits(
        max_failures_per_account=config["LOGIN_MAX_FAILURES_PER_ACCOUNT"],
        max_failures_per_address=config["LOGIN_MAX_FAILURES_PER_ADDRESS"],
        window_s=config["LOGIN_WINDOW_S"],
    )
