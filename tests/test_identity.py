"""Sign-in, tokens, rate limiting, cookies and CSRF; no password leaks anywhere."""

from __future__ import annotations

import logging

import pytest
from sqlalchemy import text

from service.store.db import session_scope
from service.store.models import ApiToken, User
from tests.conftest import Api, make_user

PASSWORD = "correct horse battery"


@pytest.mark.production_password_cost
def test_password_is_hashed_with_a_slow_scheme(app):
    make_user(app, "r@test.example", "researcher")
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        stored = session.query(User.password_hash).filter(User.email == "r@test.example").scalar()
    assert PASSWORD not in stored
    # werkzeug.security's format "scrypt:N:r:p$salt$hash"; N at least werkzeug's own default, 2**15.
    method, salt, digest = stored.split("$")
    name, n, r, p = method.split(":")
    assert name == "scrypt" and int(n) >= 2**15 and int(r) >= 8 and int(p) >= 1
    assert len(salt) >= 16 and len(digest) == 128  # 64-byte scrypt output as hex


def test_token_is_shown_once_stored_hashed_and_revocable(app, client):
    make_user(app, "r@test.example", "researcher")
    issued = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD, "name": "laptop"})
    assert issued.status_code == 201
    secret = issued.get_json()["token"]
    api = Api(client, secret)
    assert api.call("GET", "/me")["email"] == "r@test.example"
    listed = api.call("GET", "/tokens")["items"]
    assert all("token" not in t and secret not in str(t) for t in listed)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        assert session.query(ApiToken).filter(ApiToken.token_hash == secret).count() == 0
    token_id = issued.get_json()["id"]
    api.call("POST", f"/tokens/{token_id}/revoke")
    api.call("GET", "/me", expect=401)


def test_wrong_password_then_lockout_per_account(app, client):
    make_user(app, "r@test.example", "researcher")
    for _ in range(5):
        bad = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": "wrong password!"})
        assert bad.status_code == 401 and bad.get_json()["error"]["code"] == "bad_credentials"
    locked = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD})
    assert locked.status_code == 429
    error = locked.get_json()["error"]
    assert error["code"] == "locked" and error["details"]["scope"] == "account"
    assert 0 < error["details"]["retry_after_s"] <= 900
    assert "try again in about" in error["message"]


def test_lockout_per_address(app, client):
    app.config["LOGIN_MAX_FAILURES_PER_ADDRESS"] = 3
    make_user(app, "r@test.example", "researcher")
    for i in range(3):
        client.post("/api/v1/auth/tokens", json={"email": f"nobody{i}@test.example", "password": "x"})
    locked = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD})
    assert locked.status_code == 429 and locked.get_json()["error"]["details"]["scope"] == "address"


def test_web_sign_in_sets_a_safe_cookie_and_needs_csrf(app, client):
    make_user(app, "r@test.example", "researcher")
    no_csrf = client.post("/login", data={"email": "r@test.example", "password": PASSWORD})
    assert no_csrf.status_code == 400 and "security token" in no_csrf.get_data(as_text=True)
    page = client.get("/login").get_data(as_text=True)
    csrf = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    response = client.post("/login", data={"email": "r@test.example", "password": PASSWORD, "csrf_token": csrf,
                                           "next": "https://elsewhere.example/"})
    assert response.status_code == 302 and response.headers["Location"] == "/"  # never off-site
    cookie = response.headers["Set-Cookie"]
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie
    assert client.get("/stocks").status_code == 200
    # The session cookie does not authorise the API: tokens only.
    assert client.get("/api/v1/me").status_code == 401


def test_failed_web_sign_in_shows_the_reason(app, client):
    make_user(app, "r@test.example", "researcher")
    page = client.get("/login").get_data(as_text=True)
    csrf = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    response = client.post("/login", data={"email": "r@test.example", "password": "nope", "csrf_token": csrf})
    assert response.status_code == 401 and "unknown email or wrong password" in response.get_data(as_text=True)


def test_passwords_never_leak(app, client, api, caplog):
    caplog.set_level(logging.DEBUG)
    secret_password = "very secret passphrase 42"
    created = api.call("POST", "/users", {"email": "n@test.example", "display_name": "New", "role": "researcher",
                                          "password": secret_password}, 201)
    api.call("PATCH", f"/users/{created['id']}", {"password": secret_password + "!"})
    client.post("/api/v1/auth/tokens", json={"email": "n@test.example", "password": secret_password + "!"})
    client.post("/api/v1/auth/tokens", json={"email": "n@test.example", "password": "wrong " + secret_password})
    answers = str(api.call("GET", "/users")) + str(api.call("GET", f"/users/{created['id']}"))
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        audit_rows = str(session.execute(text("SELECT * FROM audit_events")).all())
    for haystack in (answers, audit_rows, caplog.text):
        assert secret_password not in haystack
    assert "password_hash" not in answers


def test_admin_manages_users_and_nobody_else(api, client, app):
    researcher = Api(client, make_user(app, "r@test.example", "researcher"))
    researcher.call("GET", "/users", expect=403)
    created = api.call("POST", "/users", {"email": "x@test.example", "display_name": "X", "role": "auditor",
                                          "password": "long enough password"}, 201)
    api.call("POST", "/users", {"email": "X@test.example", "display_name": "dup", "role": "auditor",
                                "password": "long enough password"}, 409)
    api.call("POST", "/users", {"email": "y@test.example", "display_name": "Y", "role": "wizard",
                                "password": "long enough password"}, 422)
    api.call("POST", "/users", {"email": "z@test.example", "display_name": "Z", "role": "auditor",
                                "password": "short"}, 422)
    assert api.call("POST", f"/users/{created['id']}/retire")["retired_at"]
    client.post("/api/v1/auth/tokens", json={"email": "x@test.example", "password": "long enough password"})
    me = api.call("GET", "/me")
    api.call("POST", f"/users/{me['id']}/retire", expect=409)


def test_lockout_lifts_when_the_oldest_counted_failure_leaves_the_window(app, client):
    import datetime as dt

    from service.store.models import LoginAttempt

    make_user(app, "r@test.example", "researcher")
    now = dt.datetime.now(dt.timezone.utc)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        # Five failures, the oldest 890 s ago: locked for about 10 s more (window 900 s).
        for age_s in (890, 600, 300, 60, 10):
            session.add(LoginAttempt(email="r@test.example", address="192.0.2.1", at=now - dt.timedelta(seconds=age_s)))
    locked = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD})
    assert locked.status_code == 429
    assert 5 <= locked.get_json()["error"]["details"]["retry_after_s"] <= 12
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        oldest = session.query(LoginAttempt).order_by(LoginAttempt.at).first()
        oldest.at = now - dt.timedelta(seconds=901)  # it has left the window
    assert client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD}).status_code == 201
