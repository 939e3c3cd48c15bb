"""Every route × every role against the one permission matrix (service/permissions.py).

A route with no rule in the matrix fails test_every_route_has_a_rule; a route whose
answer disagrees with the matrix for some role fails test_route_role_matrix.
"""

from __future__ import annotations

import pytest

from service.permissions import MATRIX, PUBLIC, ROLES
from service.schemas import LabIn, LocationIn, StockIn, UserIn
from service.store import identity, inventory
from service.store.db import session_scope
from service.store.models import Lab, Location, Substance, User
from tests.conftest import Api, make_user

METHODS = ("GET", "POST", "PATCH", "PUT", "DELETE")


def _routes(app):
    for rule in app.url_map.iter_rules():
        for method in sorted(rule.methods & set(METHODS)):
            yield rule, method


def test_every_route_has_a_rule(app):
    missing = [rule.endpoint for rule, _ in _routes(app) if rule.endpoint not in PUBLIC | set(MATRIX)]
    assert missing == []
    stale = [endpoint for endpoint in MATRIX if endpoint not in {r.endpoint for r in app.url_map.iter_rules()}]
    assert stale == []


def _seed(app) -> dict[str, int]:
    """One record of each kind in lab A, where the researcher is a member."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        lab = inventory.create_record(session, Lab, LabIn(code="A-1", name="Lab A"))
        place = inventory.create_record(session, Location, LocationIn(lab_id=lab.id, building="A", room="A-1",
                                                                      storage="cabinet"))
        substance_id = session.query(Substance.id).filter(Substance.key == "cadmium-oxide").scalar()
        stock = inventory.create_stock(session, StockIn(label="A-S1", substance_id=substance_id, lab_id=lab.id,
                                                        location_id=place.id, amount="1 g"))
        user = identity.create_user(session, UserIn(email="seed@test.example", display_name="seed", role="researcher",
                                                    password="seed password long"))
        return {"lab": lab.id, "location": place.id, "substance": substance_id, "stock": stock.id, "user": user.id}


def _ident_for(endpoint: str, ids: dict[str, int]) -> int:
    for name in ("lab", "location", "substance", "stock"):
        if endpoint.endswith(f"_{name}s"):
            return ids[name]
    if endpoint.endswith("_users"):
        return ids["user"]
    if endpoint == "api.revoke_token":
        return 10**6  # not the caller's own token: revoking that would end the walk
    return 1  # mixtures: a missing id still passes authorisation first


def _url(rule, ids: dict[str, int], app) -> str:
    values = {"ident": _ident_for(rule.endpoint, ids)} if "ident" in rule.arguments else {}
    values.update({name: 1 for name in rule.arguments if name != "ident"})  # e.g. entry_id
    return rule.build(values, append_unknown=False)[1]


def _sign_in_page(client, app, email: str) -> str:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        user_id = session.query(User.id).filter(User.email == email).scalar()
    with client.session_transaction() as cookie:
        cookie["user_id"] = user_id
        cookie["csrf"] = "test-csrf"
    return "test-csrf"


@pytest.mark.parametrize("role", ROLES)
def test_route_role_matrix(app, client, role):
    ids = _seed(app)
    tokens = {r: make_user(app, f"{r}@test.example", r, lab_ids=[ids["lab"]]) for r in ROLES}
    api = Api(client, tokens[role])
    csrf = _sign_in_page(client, app, f"{role}@test.example")
    wrong = []
    for rule, method in _routes(app):
        if rule.endpoint in PUBLIC or rule.endpoint == "web.logout":
            continue  # public by design; signing out is covered in test_identity
        url = _url(rule, ids, app)
        if url.startswith("/api/"):
            response = client.open(url, method=method, json={}, headers={"Authorization": f"Bearer {api.token}"})
        else:
            response = client.open(url, method=method, data={"csrf_token": csrf})
        expected_forbidden = role not in MATRIX[rule.endpoint]
        got_forbidden = response.status_code == 403
        if expected_forbidden != got_forbidden or response.status_code in (401, 500):
            wrong.append((method, url, response.status_code, "forbidden" if expected_forbidden else "allowed"))
    assert wrong == []


def test_unauthenticated_requests(app, client):
    ids = _seed(app)
    for rule, method in _routes(app):
        if rule.endpoint in PUBLIC:
            continue
        url = _url(rule, ids, app)
        response = client.open(url, method=method, json={} if url.startswith("/api/") else None)
        if url.startswith("/api/"):
            assert response.status_code == 401, (method, url)
            assert response.get_json()["error"]["code"] == "unauthenticated"
        elif method == "GET":
            assert response.status_code == 302 and "/login" in response.headers["Location"], (method, url)
        else:
            assert response.status_code == 400, (method, url)  # no CSRF token without a session


def test_researcher_is_limited_to_their_labs(app, client):
    ids = _seed(app)
    researcher = Api(client, make_user(app, "r@test.example", "researcher", lab_ids=[ids["lab"]]))
    admin = Api(client, make_user(app, "a@test.example", "admin"))
    other = admin.call("POST", "/labs", {"code": "B-2", "name": "Lab B"}, 201)["id"]
    other_place = admin.call("POST", "/locations", {"lab_id": other, "building": "B", "room": "B-2",
                                                    "storage": "shelf"}, 201)["id"]
    foreign = admin.call("POST", "/stocks", {"label": "B-S1", "substance_id": ids["substance"], "lab_id": other,
                                             "location_id": other_place, "amount": "2 g"}, 201)["id"]
    assert [s["label"] for s in researcher.call("GET", "/stocks")["items"]] == ["A-S1"]
    assert [lab["code"] for lab in researcher.call("GET", "/labs")["items"]] == ["A-1"]
    researcher.call("GET", f"/stocks/{foreign}", expect=403)
    researcher.call("PATCH", f"/stocks/{foreign}", {"amount": "1 g"}, expect=403)
    researcher.call("POST", f"/stocks/{foreign}/retire", expect=403)
    researcher.call("POST", "/stocks", {"label": "B-S2", "substance_id": ids["substance"], "lab_id": other,
                                        "location_id": other_place, "amount": "2 g"}, expect=403)
    researcher.call("PATCH", f"/stocks/{ids['stock']}", {"amount": "0.5 g"})
