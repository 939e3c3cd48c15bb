"""Sign-in and sign-out pages, and the account page with personal API tokens."""

from __future__ import annotations

from urllib.parse import urlparse

from flask import redirect, render_template, request, url_for
from pydantic import ValidationError

from service.auth import client_address, current_user, login_limits, sign_in, sign_out
from service.present.identity import dump_token, dump_user
from service.schemas import PAGE_LIMIT_MAX, TokenRequest
from service.store import identity, inventory
from service.store.db import get_session
from service.store.models import Lab
from service.web import bp


def _safe_next(target: str | None) -> str:
    # Only local paths: never redirect off-site after signing in.
    parsed = urlparse(target or "")
    if parsed.scheme or parsed.netloc or not (target or "").startswith("/"):
        return url_for("web.overview")
    return target


@bp.get("/login", endpoint="login")
def login():
    return render_template("pages/login.html", next=_safe_next(request.args.get("next")), error=None, email="")


@bp.post("/login", endpoint="login_submit")
def login_submit():
    email = request.form.get("email", "")
    session = get_session()
    try:
        user = identity.authenticate(session, email, request.form.get("password", ""),
                                     client_address(), login_limits())
    except (identity.LoginLocked, identity.BadCredentials) as exc:
        session.commit()  # the failed attempt counts towards the limit
        page = render_template("pages/login.html", next=_safe_next(request.form.get("next")), error=str(exc), email=email)
        if isinstance(exc, identity.LoginLocked):
            return page, 429, {"Retry-After": str(exc.retry_after_s)}
        return page, 401
    sign_in(user)
    return redirect(_safe_next(request.form.get("next")))


@bp.post("/logout", endpoint="logout")
def logout():
    sign_out()
    return redirect(url_for("web.login"))


# --- the account page: who you are, your labs, and personal tokens for the API ---------------------


def _account_page(status: int = 200, *, issued=None, error: str | None = None, name: str = ""):
    session = get_session()
    user = current_user()
    tokens = identity.list_tokens(session, user, limit=PAGE_LIMIT_MAX)
    labs = inventory.list_records(session, Lab, lab_ids=user.lab_ids, limit=PAGE_LIMIT_MAX) if user.lab_ids else []
    return render_template("pages/account.html", account=dump_user(user), labs=labs,
                           tokens=[dump_token(t) for t in tokens], issued=issued, error=error, name=name,
                           api_index=url_for("api.index"), openapi=url_for("api.openapi")), status


@bp.get("/account", endpoint="account")
def account():
    return _account_page()


@bp.post("/account/tokens", endpoint="account_token_create")
def account_token_create():
    """A new personal token, after the password is given again (a left-open browser cannot mint one)."""
    user = current_user()
    name = request.form.get("name", "").strip()[:200]
    if not request.form.get("password"):
        return _account_page(422, error="password: give your password to make a token", name=name)
    try:
        body = TokenRequest(email=user.email, password=request.form.get("password", ""), name=name or "api")
    except ValidationError as exc:
        return _account_page(422, error="; ".join(f"{'.'.join(map(str, e['loc']))}: {e['msg']}"
                                                  for e in exc.errors()), name=name)
    session = get_session()
    try:
        identity.authenticate(session, user.email, body.password.get_secret_value(), client_address(), login_limits())
    except (identity.LoginLocked, identity.BadCredentials) as exc:
        session.commit()  # a wrong password here counts towards the sign-in limits too
        return _account_page(429 if isinstance(exc, identity.LoginLocked) else 401, error=str(exc), name=name)
    issued = identity.issue_token(session, user, body.name)
    session.commit()
    # Shown on this answer only; the page is not cached and the secret is never stored.
    page, status = _account_page(201, issued={"name": issued.token.name, "secret": issued.secret})
    return page, status, {"Cache-Control": "no-store"}


@bp.post("/account/tokens/<int:ident>/revoke", endpoint="account_token_revoke")
def account_token_revoke(ident: int):
    identity.revoke_token(get_session(), current_user(), ident)
    return redirect(url_for("web.account"), 303)
