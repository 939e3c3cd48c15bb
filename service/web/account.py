"""Sign-in and sign-out pages."""

from __future__ import annotations

from urllib.parse import urlparse

from flask import redirect, render_template, request, url_for

from service.auth import client_address, login_limits, sign_in, sign_out
from service.store import identity
from service.store.db import get_session
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
