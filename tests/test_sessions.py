"""Sessions and sign-in hardening: the signing key, session versions, the last administrator,
sign-in timing, the client address behind a proxy, Retry-After, the password rule and the
security headers on every answer."""

from __future__ import annotations

import os
import re
import stat
import statistics
import time

import pytest
from click.testing import CliRunner
from flask import Flask
from flask.sessions import SecureCookieSessionInterface

from service.app import create_app
from service.config import DEVELOPMENT_KEY, ConfigError, load_config
from service.errors import Conflict
from service.schemas import UserIn
from service.store import identity
from service.store.db import session_scope, upgrade
from service.store.models import User
from tests.conftest import Api, make_user

PASSWORD = "correct horse battery"  # make_user's default


def _sessions(app):
    return app.extensions["dotledger.sessions"]


def _user_id(app, email: str) -> int:
    with session_scope(_sessions(app)) as session:
        return session.query(User.id).filter(User.email == email).scalar()


def _page_sign_in(client, email: str, password: str = PASSWORD):
    page = client.get("/login").get_data(as_text=True)
    csrf = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    return client.post("/login", data={"email": email, "password": password, "csrf_token": csrf})


def _csrf(client) -> str:
    with client.session_transaction() as cookie:
        return cookie["csrf"]


def _forge(secret_key: str, payload: dict) -> str:
    """A session cookie as Flask would sign it with ``secret_key``."""
    forger = Flask("forger")
    forger.secret_key = secret_key
    return SecureCookieSessionInterface().get_signing_serializer(forger).dumps(payload)


# --- the signing key -----------------------------------------------------------------------------

@pytest.fixture
def served_app(tmp_path, monkeypatch, rules_dir):
    """Apps as `dotledger serve` builds them (no TESTING, no configured key) on one instance folder."""
    monkeypatch.delenv("DOTLEDGER_SECRET_KEY", raising=False)
    monkeypatch.setenv("DOTLEDGER_INSTANCE_PATH", str(tmp_path / "instance"))
    url = f"sqlite:///{tmp_path / 'served.sqlite'}"
    upgrade(url)
    made = []

    def build():
        app = create_app({"DATABASE_URL": url, "RULES_DIR": str(rules_dir)})
        made.append(app)
        return app

    yield build
    for app in made:
        app.extensions["dotledger.engine"].dispose()


def test_a_random_key_is_kept_in_the_instance_folder_and_shared(served_app, tmp_path):
    first, second = served_app(), served_app()
    key_file = tmp_path / "instance" / "secret_key"
    assert first.secret_key != DEVELOPMENT_KEY
    assert first.secret_key == second.secret_key == key_file.read_text().strip()
    assert len(first.secret_key) >= 64  # 32 random bytes as hex
    assert stat.S_IMODE(os.stat(key_file).st_mode) == 0o600  # readable by the server's account only
    # A session signed by one process is good in the other (several workers, or a restart).
    with session_scope(_sessions(first)) as session:
        identity.create_user(session, UserIn(email="r@test.example", display_name="r", role="researcher",
                                             password=PASSWORD))
    one = first.test_client()
    assert _page_sign_in(one, "r@test.example").status_code == 302
    other = second.test_client()
    other.set_cookie("session", one.get_cookie("session").value)
    assert other.get("/").status_code == 200


def test_a_cookie_forged_with_the_development_key_is_refused(served_app):
    app = served_app()
    with session_scope(_sessions(app)) as session:
        admin = identity.create_user(session, UserIn(email="a@test.example", display_name="a", role="admin",
                                                     password=PASSWORD))
        payload = {"user_id": admin.id, "session_version": admin.session_version, "csrf": "x"}
    client = app.test_client()
    client.set_cookie("session", _forge(DEVELOPMENT_KEY, payload))
    answer = client.get("/")
    assert answer.status_code == 302 and "/login" in answer.headers["Location"]
    # The same payload signed with the instance's key is a valid session: the refusal is the key's.
    client.set_cookie("session", _forge(app.secret_key, payload))
    assert client.get("/").status_code == 200


def test_the_development_key_is_refused_outside_tests(tmp_path, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_SECRET_KEY", DEVELOPMENT_KEY)
    with pytest.raises(ConfigError, match="development key"):
        load_config(str(tmp_path))
    assert load_config(str(tmp_path), {"TESTING": True})["SECRET_KEY"] == DEVELOPMENT_KEY
    # The command line stops with the reason instead of serving.
    from service.console import main

    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", f"sqlite:///{tmp_path / 'cli.sqlite'}")
    result = CliRunner().invoke(main, ["init"])
    assert result.exit_code != 0 and "development key" in result.output


def test_a_short_key_file_is_refused(tmp_path, monkeypatch):
    monkeypatch.delenv("DOTLEDGER_SECRET_KEY", raising=False)
    (tmp_path / "secret_key").write_text("short\n")
    with pytest.raises(ConfigError, match="too short"):
        load_config(str(tmp_path))


# --- session versions --------------------------------------------------------------------------

def test_a_cookie_copied_before_sign_out_stops_working(app, client):
    make_user(app, "r@test.example", "researcher")
    assert _page_sign_in(client, "r@test.example").status_code == 302
    copied = client.get_cookie("session").value
    thief = app.test_client()
    thief.set_cookie("session", copied)
    assert thief.get("/").status_code == 200  # the copy works while the session lasts
    assert client.post("/logout", data={"csrf_token": _csrf(client)}).status_code == 302
    answer = thief.get("/")
    assert answer.status_code == 302 and "/login" in answer.headers["Location"]
    # Signing in again gives a new, working session.
    assert _page_sign_in(client, "r@test.example").status_code == 302
    assert client.get("/").status_code == 200


def test_a_password_change_ends_sessions_and_revokes_tokens(app, client, api):
    token = make_user(app, "r@test.example", "researcher")
    second_token = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD})
    researcher = Api(client, token)
    researcher.call("GET", "/me")
    browser = app.test_client()
    assert _page_sign_in(browser, "r@test.example").status_code == 302
    user_id = _user_id(app, "r@test.example")
    api.call("PATCH", f"/users/{user_id}", {"password": "a new long passphrase"})
    researcher.call("GET", "/me", expect=401)
    researcher.as_(second_token.get_json()["token"]).call("GET", "/me", expect=401)
    assert browser.get("/").status_code == 302
    listed = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": "a new long passphrase"})
    assert listed.status_code == 201  # the new password works
    api.call("GET", "/me")  # the administrator's own token is untouched


def test_a_name_change_keeps_sessions(app, client, api):
    make_user(app, "r@test.example", "researcher")
    assert _page_sign_in(client, "r@test.example").status_code == 302
    api.call("PATCH", f"/users/{_user_id(app, 'r@test.example')}", {"display_name": "Renamed"})
    assert client.get("/").status_code == 200


# --- the last administrator --------------------------------------------------------------------

def test_the_last_admin_cannot_be_demoted_even_by_themselves(app, client, api):
    me = api.call("GET", "/me")
    refused = api.call("PATCH", f"/users/{me['id']}", {"role": "researcher"}, expect=409)
    assert "last active administrator" in refused["error"]["message"]
    assert refused["error"]["details"][0]["field"] == "role"
    assert api.call("GET", "/me")["role"] == "admin"
    # With a second administrator, one of them may step down.
    other = api.call("POST", "/users", {"email": "b@test.example", "display_name": "B", "role": "admin",
                                        "password": "long enough password"}, 201)
    assert api.call("PATCH", f"/users/{me['id']}", {"role": "auditor"})["role"] == "auditor"
    b = Api(client, client.post("/api/v1/auth/tokens", json={"email": "b@test.example",
                                                               "password": "long enough password"}).get_json()["token"])
    b.call("PATCH", f"/users/{other['id']}", {"role": "researcher"}, expect=409)


def test_the_last_admin_cannot_be_retired(app, api):
    me = api.call("GET", "/me")
    with session_scope(_sessions(app)) as session:
        with pytest.raises(Conflict, match="last active administrator"):
            identity.retire_user(session, session.get(User, me["id"]))
    api.call("POST", "/users", {"email": "b@test.example", "display_name": "B", "role": "admin",
                                "password": "long enough password"}, 201)
    with session_scope(_sessions(app)) as session:
        assert identity.retire_user(session, session.get(User, me["id"])).retired_at is not None
    api.call("GET", "/me", expect=401)  # a retired account's tokens are revoked with it


# --- sign-in timing --------------------------------------------------------------------------------

@pytest.mark.production_password_cost  # at the suite's low cost the hash would hide in the noise
def test_an_unknown_email_takes_about_as_long_as_a_known_one(app):
    """Median of several attempts each; only the ratio is checked (the machine is shared and noisy)."""
    make_user(app, "r@test.example", "researcher")
    limits = identity.LoginLimits(max_failures_per_account=1000, max_failures_per_address=1000)
    known, unknown = [], []
    with session_scope(_sessions(app)) as session:
        for attempt in range(7):
            started = time.perf_counter()
            identity.authenticate(session, "r@test.example", PASSWORD, "192.0.2.1", limits)
            known.append(time.perf_counter() - started)
            started = time.perf_counter()
            with pytest.raises(identity.BadCredentials):
                identity.authenticate(session, f"nobody{attempt}@test.example", PASSWORD, "192.0.2.1", limits)
            unknown.append(time.perf_counter() - started)
    ratio = statistics.median(unknown) / statistics.median(known)
    assert 0.5 < ratio < 2, (ratio, known, unknown)


# --- the client address behind a proxy, Retry-After ------------------------------------------------

def _proxied_app(database_url, rules_dir, proxies: int):
    upgrade(database_url)
    return create_app({"DATABASE_URL": database_url, "TESTING": True, "RULES_DIR": str(rules_dir),
                       "TRUSTED_PROXIES": proxies, "LOGIN_MAX_FAILURES_PER_ADDRESS": 2})


def _fail_twice_from(client, address: str) -> None:
    for i in range(2):
        answer = client.post("/api/v1/auth/tokens", json={"email": f"nobody{i}@test.example", "password": "x"},
                             headers={"X-Forwarded-For": address})
        assert answer.status_code == 401


# Addresses from the documentation ranges of RFC 5737.
@pytest.mark.parametrize("proxies, other_client_locked", [(1, False), (0, True)])
def test_the_address_lockout_uses_the_client_behind_a_trusted_proxy(database_url, rules_dir, proxies,
                                                                     other_client_locked):
    app = _proxied_app(database_url, rules_dir, proxies)
    try:
        make_user(app, "r@test.example", "researcher")
        client = app.test_client()
        _fail_twice_from(client, "203.0.113.5")
        attacker = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD},
                               headers={"X-Forwarded-For": "203.0.113.5"})
        assert attacker.status_code == 429
        other = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD},
                            headers={"X-Forwarded-For": "198.51.100.7"})
        # Behind one trusted proxy each client has its own count; with none the header is ignored
        # (else a client could name a fresh address on every attempt).
        assert other.status_code == (429 if other_client_locked else 201)
    finally:
        app.extensions["dotledger.engine"].dispose()


def test_retry_after_on_every_429(app, client):
    app.config["LOGIN_MAX_FAILURES_PER_ADDRESS"] = 2
    make_user(app, "r@test.example", "researcher")
    for i in range(2):
        client.post("/api/v1/auth/tokens", json={"email": f"nobody{i}@test.example", "password": "x"})
    locked = client.post("/api/v1/auth/tokens", json={"email": "r@test.example", "password": PASSWORD})
    assert locked.status_code == 429
    seconds = locked.get_json()["error"]["details"]["retry_after_s"]
    assert locked.headers["Retry-After"] == str(seconds) and 0 < seconds <= 900  # RFC 9110 §10.2.3: delay-seconds
    page = _page_sign_in(client, "r@test.example")
    assert page.status_code == 429
    assert page.headers["Retry-After"].isdigit() and 0 < int(page.headers["Retry-After"]) <= 900


# --- the password rule ---------------------------------------------------------------------------

# NIST SP 800-63B §5.1.1.2 (from memory): compare new passwords against commonly used ones and
# repetitive characters; normalise with NFKC before checking.
REFUSED = [
    ("a" * 12, "one character repeated"),
    ("\u200b" * 12, "zero-width spaces only"),
    ("\u200b" * 6 + "abcdef", "six visible characters"),
    ("e\u0301" * 12, "é repeated, decomposed (NFKC composes it)"),
    ("Password1234", "common, other case"),
    ("\uff50\uff41\uff53\uff53\uff57\uff4f\uff52\uff44\uff11\uff12\uff13\uff14", "common, full-width letters"),
    ("123456789012", "common: digit run"),
    ("qwertyuiopas", "common: keyboard row"),
]


@pytest.mark.parametrize("password, why", REFUSED)
def test_weak_passwords_are_refused_naming_the_field(api, password, why):
    refused = api.call("POST", "/users", {"email": "x@test.example", "display_name": "X", "role": "auditor",
                                          "password": password}, 422)
    assert [d["field"] for d in refused["error"]["details"]] == ["password"], why
    me = api.call("GET", "/me")
    patched = api.call("PATCH", f"/users/{me['id']}", {"password": password}, 422)
    assert [d["field"] for d in patched["error"]["details"]] == ["password"], why


@pytest.mark.parametrize("password", ["correct horse battery", "Kühlschrank-Rotor 7"])
def test_reasonable_passwords_pass(api, password):
    api.call("POST", "/users", {"email": "x@test.example", "display_name": "X", "role": "auditor",
                                "password": password}, 201)


# --- security headers --------------------------------------------------------------------------

def test_security_headers_on_pages_and_api(app, client):
    token = make_user(app, "r@test.example", "researcher")
    answers = [
        client.get("/login"),  # a page
        client.get("/"),  # a redirect to sign in
        client.get("/api/v1/me", headers={"Authorization": f"Bearer {token}"}),  # the API
        client.get("/api/v1/me"),  # an API error
        client.get("/no-such-page"),  # a page error
    ]
    for answer in answers:
        csp = answer.headers.get("Content-Security-Policy", "")
        assert "default-src 'self'" in csp and "frame-ancestors 'none'" in csp, answer.request.path
        assert "'unsafe-inline'" not in csp.split("script-src", 1)[1].split(";", 1)[0]
        assert answer.headers.get("X-Frame-Options") == "DENY"
        assert answer.headers.get("X-Content-Type-Options") == "nosniff"
        assert answer.headers.get("Referrer-Policy") == "same-origin"


def test_pages_need_no_inline_script(rules_dir):
    """The policy allows scripts only from this server: no template may carry an inline one."""
    templates = rules_dir.parent / "templates"
    for path in templates.rglob("*.html"):
        text = path.read_text(encoding="utf-8").lower()
        assert not re.search(r"<[^>]*\son[a-z]+\s*=", text), path  # onclick= and the like
        assert "javascript:" not in text, path
        for chunk in text.split("<script")[1:]:
            assert "src=" in chunk.split(">", 1)[0], path
