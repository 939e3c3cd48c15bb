"""The account page: personal API tokens made and revoked in the browser (the password asked again)."""

from __future__ import annotations

import re

from tests.test_web_pages import _client, demo  # noqa: F401 - the demo fixture

RESEARCHER = "researcher@example.org"


def _csrf(page: str) -> str:
    return page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]


def _secret(page: str) -> str | None:
    found = re.search(r'id="issued-secret"[^>]*value="([^"]+)"', page)
    return found.group(1) if found else None


def test_a_token_made_on_the_page_reaches_the_api_until_revoked(demo):
    app, passwords = demo
    browser = _client(demo, RESEARCHER)
    page = browser.get("/account").get_data(as_text=True)
    assert "/api/v1/openapi.json" in page and "No tokens yet." in page
    csrf = _csrf(page)

    made = browser.post("/account/tokens", data={"csrf_token": csrf, "name": "plate reader export",
                                                 "password": passwords[RESEARCHER]})
    assert made.status_code == 201 and made.headers["Cache-Control"] == "no-store"
    secret = _secret(made.get_data(as_text=True))
    assert secret
    api = app.test_client()
    me = api.get("/api/v1/me", headers={"Authorization": f"Bearer {secret}"})
    assert me.status_code == 200 and me.get_json()["email"] == RESEARCHER

    # Shown once: the page read again lists the token by its first characters, never the secret.
    again = browser.get("/account").get_data(as_text=True)
    assert secret not in again and _secret(again) is None and "plate reader export" in again
    token_id = int(re.search(r'/account/tokens/(\d+)/revoke', again).group(1))

    revoked = browser.post(f"/account/tokens/{token_id}/revoke", data={"csrf_token": csrf})
    assert revoked.status_code == 303
    assert api.get("/api/v1/me", headers={"Authorization": f"Bearer {secret}"}).status_code == 401
    assert browser.post(f"/account/tokens/{token_id}/revoke", data={"csrf_token": csrf}).status_code == 409


def test_no_token_without_the_password_or_the_form_token(demo):
    app, passwords = demo
    browser = _client(demo, RESEARCHER)
    csrf = _csrf(browser.get("/account").get_data(as_text=True))
    wrong = browser.post("/account/tokens", data={"csrf_token": csrf, "name": "x", "password": "not it"})
    assert wrong.status_code == 401 and _secret(wrong.get_data(as_text=True)) is None
    empty = browser.post("/account/tokens", data={"csrf_token": csrf, "name": "x", "password": ""})
    assert empty.status_code == 422 and "give your password" in empty.get_data(as_text=True)
    long_name = browser.post("/account/tokens", data={"csrf_token": csrf, "name": "n" * 150,
                                                      "password": passwords[RESEARCHER]})
    assert long_name.status_code == 422 and "name" in long_name.get_data(as_text=True)
    forged = browser.post("/account/tokens", data={"name": "x", "password": passwords[RESEARCHER]})
    assert forged.status_code == 400
    assert "No tokens yet." in browser.get("/account").get_data(as_text=True)


def test_nobody_revokes_another_accounts_token(demo):
    app, passwords = demo
    owner = _client(demo, RESEARCHER)
    csrf = _csrf(owner.get("/account").get_data(as_text=True))
    owner.post("/account/tokens", data={"csrf_token": csrf, "name": "mine", "password": passwords[RESEARCHER]})
    token_id = int(re.search(r'/account/tokens/(\d+)/revoke', owner.get("/account").get_data(as_text=True)).group(1))
    other = _client(demo, "safety@example.org")
    other_csrf = _csrf(other.get("/account").get_data(as_text=True))
    assert other.post(f"/account/tokens/{token_id}/revoke", data={"csrf_token": other_csrf}).status_code == 404
    assert "active" in owner.get("/account").get_data(as_text=True)
