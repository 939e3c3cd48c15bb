"""Every route × every role against a table of who may do what, written out here by hand.

The expectation is not read from service/permissions.py: it is the policy as the design
describes the roles, so a change to the matrix that contradicts it fails here.

- researcher: registers and submits procedures, records runs, puts waste into containers, keeps
  the stocks and mixtures of their own labs (lab-scoped).
- safety_officer: approves, asks for changes or declines submitted procedures (the only role that
  decides; nobody approves their own); runs the waste containers through pickup and collection.
- lab_manager: keeps the chemical inventory (labs, locations, substances, stocks, mixtures).
- auditor: reads everything, changes nothing; reads the audit trail.
- admin: manages users; may do what the lab manager does, but does not decide on procedures.
- anonymous: only signs in and reads the API index and its OpenAPI document.

test_every_route_has_an_expectation fails for a route missing from this table, and
test_matrix_agrees_with_the_policy and test_route_role_matrix fail when the matrix or the
answers disagree with it.
"""

from __future__ import annotations

import pytest

from service.permissions import MATRIX, PUBLIC
from service.schemas import LabIn, LocationIn, StockIn, UserIn
from service.store import identity, inventory
from service.store.db import session_scope
from service.store.models import Lab, Location, Substance, User
from tests.conftest import Api, make_user

METHODS = ("GET", "POST", "PATCH", "PUT", "DELETE")

RESEARCHER, OFFICER, MANAGER, AUDITOR, ADMIN = "researcher", "safety_officer", "lab_manager", "auditor", "admin"
ROLES = (RESEARCHER, OFFICER, MANAGER, AUDITOR, ADMIN)
SIGNED_IN = frozenset(ROLES)

# Reachable without signing in (the anonymous caller).
PUBLIC_ENDPOINTS = frozenset({"static", "api.index", "api.openapi", "api.issue_token", "web.login", "web.login_submit"})

_INVENTORY = ("labs", "locations", "substances", "stocks", "mixtures")


def _writes(resource: str) -> list[str]:
    return [f"api.{verb}_{resource}" for verb in ("create", "update", "retire")]


# group: (roles allowed, endpoints). Every endpoint of the app appears exactly once.
POLICY: dict[str, tuple[frozenset[str], list[str]]] = {
    "own account and sign-out": (SIGNED_IN, ["api.me", "api.list_tokens", "api.revoke_token", "web.logout",
                                             "web.account", "web.account_token_create", "web.account_token_revoke"]),
    # Reads: everyone signed in (the auditor reads everything; researchers see their labs only).
    "reads": (SIGNED_IN, [
        *[f"api.{verb}_{resource}" for resource in _INVENTORY for verb in ("list", "read")],
        "api.list_procedures", "api.read_procedures", "api.list_procedure_revisions",
        "api.list_procedure_decisions", "api.preview_procedure",
        "api.list_runs", "api.read_runs", "api.read_run_balance",
        "api.list_waste_containers", "api.read_waste_containers", "api.list_waste_entries",
        "api.list_stock_movements_of_stock", "api.list_stock_movements",
        "api.list_accumulation_areas", "api.read_accumulation_areas",
        "documents.procedure_assessment_pdf", "documents.procedure_assessment_html",
        "documents.waste_container_manifest_pdf", "documents.waste_container_manifest_html",
        "documents_pages.procedure_assessment_pdf", "documents_pages.waste_container_manifest_pdf",
        "documents.waste_container_label_pdf", "documents_pages.waste_container_label_pdf",
        "web.overview", "web.stocks", "web.mixtures", "web.procedures", "web.procedure",
        "web.waste", "web.container", "web.run", "web.runs", "web.stock", "web.areas", "web.area",
    ]),
    "reports (waste leaving, inventory on hand)": (SIGNED_IN, ["api.report_waste", "api.report_inventory"]),
    # The site element ledger is site-wide: every role but the lab-scoped researcher.
    "site element ledger": (frozenset({OFFICER, MANAGER, AUDITOR, ADMIN}),
                            ["api.report_elements", "api.report_element_figure",
                             "web.ledger", "web.ledger_figure", "web.ledger_download"]),
    # The generator category is the whole site's (40 CFR 262.13): not for a lab-scoped researcher.
    "generator category of the site": (frozenset({OFFICER, MANAGER, AUDITOR, ADMIN}),
                                       ["api.report_generator_category"]),
    "estimate from absorbance (a calculation, nothing stored)": (SIGNED_IN, ["api.create_estimate"]),
    "review queue (who decides, and who oversees)": (frozenset({OFFICER, AUDITOR, ADMIN}),
                                                     ["api.review_queue", "web.review"]),
    # Inventory writes: the lab manager keeps the inventory; the auditor never writes.
    "labs": (frozenset({MANAGER, ADMIN}), _writes("labs")),
    "locations and the substance catalogue (storage and hazard data: also the safety officer)": (
        frozenset({MANAGER, OFFICER, ADMIN}), _writes("locations") + _writes("substances")),
    "stocks and mixtures (researchers in their labs prepare and draw them)": (
        frozenset({RESEARCHER, MANAGER, ADMIN}), _writes("stocks") + _writes("mixtures")),
    "stocks and mixtures by the pages' forms: as the API's writes": (
        frozenset({RESEARCHER, MANAGER, ADMIN}), ["web.stock_new", "web.stock_create", "web.stock_edit",
                                                  "web.stock_save", "web.mixture_new", "web.mixture_create"]),
    "stocks leaving the inventory (dispose, transfer, ship): as the stocks' writers": (
        frozenset({RESEARCHER, MANAGER, ADMIN}), ["api.dispose_stock", "api.transfer_stock", "api.ship_stock",
                                                  "web.stock_move", "web.stock_move_submit"]),
    # A spreadsheet names labs by code, any lab of the site: the lab manager keeps the inventory (and the
    # admin); a lab-scoped researcher does not import into other labs.
    "spreadsheet import (API and pages)": (frozenset({MANAGER, ADMIN}), [
        "api.import_stocks", "web.stock_import", "web.stock_import_check", "web.stock_import_run"]),
    # Procedures: researchers register and submit; only the safety officer decides.
    # (withdraw: researchers their own only, which the store checks per procedure)
    "procedure create, edit, submit, withdraw": (frozenset({RESEARCHER, MANAGER, ADMIN}),
                                                 ["api.create_procedures", "api.update_procedures",
                                                  "api.submit_procedure", "api.withdraw_procedure",
                                                  "web.procedure_new", "web.procedure_create", "web.procedure_edit",
                                                  "web.procedure_save", "web.procedure_check"]),
    "approve, request changes, decline (and the page they are taken on)": (
        frozenset({OFFICER}), ["api.approve_procedure", "api.request_changes_procedure", "api.decline_procedure",
                               "web.review_procedure"]),
    # The pages' workflow form: every role reaches it; the view answers 403 unless the role may take the
    # action through its API route (test_web_workflow checks that per action).
    "workflow form of the pages": (SIGNED_IN, ["web.procedure_act"]),
    "retire an approved procedure": (frozenset({OFFICER, MANAGER, ADMIN}), ["api.retire_procedure"]),
    "runs (researchers record their batches)": (frozenset({RESEARCHER, MANAGER, ADMIN}),
                                                ["api.create_runs", "api.add_run_output", "api.add_run_loss",
                                                 "api.close_run", "api.stock_run_output",
                                                 "web.run_new", "web.run_start", "web.run_output_new",
                                                 "web.run_output_add", "web.run_loss_new", "web.run_loss_add",
                                                 "web.run_stock_new", "web.run_stock_add", "web.run_close"]),
    # Waste: researchers put each wash and solid into a container; the safety officer runs the containers.
    "waste entries (add, reverse, mark full)": (frozenset({RESEARCHER, MANAGER, OFFICER, ADMIN}),
                                                ["api.add_waste_entry", "api.reverse_waste_entry",
                                                 "api.mark_full_waste_container", "web.waste_entry_choose",
                                                 "web.waste_entry", "web.waste_entry_submit",
                                                 "web.waste_entry_reverse"]),
    # The container's state buttons: every role that may take some move reaches the route; the view answers
    # 403 unless the role may take that move through its API route (tests/test_web_waste.py checks it).
    "container state form of the pages": (frozenset({RESEARCHER, MANAGER, OFFICER, ADMIN}),
                                          ["web.container_move"]),
    "waste containers (create, request pickup)": (frozenset({OFFICER, MANAGER, ADMIN}),
                                                  ["api.create_waste_containers", "api.request_pickup_waste_container"]),
    "collection by the contractor": (frozenset({OFFICER, ADMIN}), ["api.collect_waste_container"]),
    # The waste determination rests with the safety officer (the design); the admin may record one.
    "waste determination (confirmed codes)": (frozenset({OFFICER, ADMIN}), ["api.determine_waste_container",
                                                                            "web.container_determination",
                                                                            "web.container_determine"]),
    "audit trail": (frozenset({AUDITOR, ADMIN}), ["api.list_audit_events", "web.audit", "web.audit_verify"]),
    "user management": (frozenset({ADMIN}), ["api.list_users", "api.read_users", *_writes("users")]),
}
EXPECTED: dict[str, frozenset[str]] = {
    endpoint: roles for roles, endpoints in POLICY.values() for endpoint in endpoints
}


def _routes(app):
    for rule in app.url_map.iter_rules():
        for method in sorted(rule.methods & set(METHODS)):
            yield rule, method


def test_policy_table_is_consistent_with_the_roles_as_described(app):
    listed = [endpoint for _, endpoints in POLICY.values() for endpoint in endpoints]
    assert len(listed) == len(set(listed)) == len(EXPECTED)  # no endpoint in two groups
    assert not PUBLIC_ENDPOINTS & set(EXPECTED)
    # Only the safety officer decides on a procedure; only the admin manages users.
    assert {e for e, roles in EXPECTED.items() if roles == {OFFICER}} == {
        "api.approve_procedure", "api.request_changes_procedure", "api.decline_procedure", "web.review_procedure"}
    assert {e for e, roles in EXPECTED.items() if roles == {ADMIN}} == {
        "api.list_users", "api.read_users", "api.create_users", "api.update_users", "api.retire_users"}
    # The auditor changes nothing: apart from GETs, only their own tokens, signing out, a calculation,
    # recomputing the audit chain (a check that stores nothing) and the pages' workflow form, whose view
    # refuses the auditor every action.
    auditor_non_get = {rule.endpoint for rule, method in _routes(app)
                       if method != "GET" and AUDITOR in EXPECTED.get(rule.endpoint, ())}
    assert auditor_non_get == {"api.revoke_token", "web.logout", "api.create_estimate", "web.audit_verify",
                               "web.account_token_create", "web.account_token_revoke",
                               "web.procedure_act"}


def test_every_route_has_an_expectation(app):
    endpoints = {rule.endpoint for rule in app.url_map.iter_rules()}
    assert endpoints - PUBLIC_ENDPOINTS - set(EXPECTED) == set()  # a new route needs a line above
    assert set(EXPECTED) - endpoints == set()  # and a removed one loses its line


def test_matrix_agrees_with_the_policy():
    assert set(PUBLIC) == PUBLIC_ENDPOINTS
    disagree = {endpoint: (sorted(MATRIX.get(endpoint, ())), sorted(roles)) for endpoint, roles in EXPECTED.items()
                if set(MATRIX.get(endpoint, ())) != roles}
    assert disagree == {}, "endpoint: (matrix, expected)"
    assert set(MATRIX) == set(EXPECTED)
    assert set().union(*MATRIX.values()) == set(ROLES)


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
    if endpoint in ("api.revoke_token", "web.account_token_revoke"):
        return 10**6  # not the caller's own token: revoking that would end the walk
    return 1  # mixtures: a missing id still passes authorisation first


def _url(rule, ids: dict[str, int], app) -> str:
    values = {"ident": _ident_for(rule.endpoint, ids)} if "ident" in rule.arguments else {}
    values.update({name: 1 for name in rule.arguments if name != "ident"})  # e.g. entry_id
    return rule.build(values, append_unknown=False)[1]


def _sign_in_page(client, app, email: str) -> str:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        user_id, version = session.query(User.id, User.session_version).filter(User.email == email).one()
    with client.session_transaction() as cookie:
        cookie["user_id"] = user_id
        cookie["session_version"] = version
        cookie["csrf"] = "test-csrf"
    return "test-csrf"


@pytest.mark.parametrize("role", ROLES)
def test_route_role_matrix(app, client, role):
    ids = _seed(app)
    tokens = {r: make_user(app, f"{r}@test.example", r, lab_ids=[ids["lab"]]) for r in ROLES}
    api = Api(client, tokens[role])
    csrf = _sign_in_page(client, app, f"{role}@test.example")
    wrong, walked = [], set()
    for rule, method in _routes(app):
        if rule.endpoint in PUBLIC_ENDPOINTS or rule.endpoint == "web.logout":
            continue  # public by design; signing out is covered in test_identity
        walked.add(rule.endpoint)
        url = _url(rule, ids, app)
        if url.startswith("/api/"):
            response = client.open(url, method=method, json={}, headers={"Authorization": f"Bearer {api.token}"})
        else:
            response = client.open(url, method=method, data={"csrf_token": csrf})
        expected_forbidden = role not in EXPECTED[rule.endpoint]
        got_forbidden = response.status_code == 403
        if expected_forbidden != got_forbidden or response.status_code in (401, 500):
            wrong.append((method, url, response.status_code, "forbidden" if expected_forbidden else "allowed"))
    assert wrong == []
    assert walked == set(EXPECTED) - {"web.logout"}


def test_unauthenticated_requests(app, client):
    ids = _seed(app)
    walked = set()
    for rule, method in _routes(app):
        if rule.endpoint in PUBLIC_ENDPOINTS:
            continue
        walked.add(rule.endpoint)
        url = _url(rule, ids, app)
        response = client.open(url, method=method, json={} if url.startswith("/api/") else None)
        if url.startswith("/api/"):
            assert response.status_code == 401, (method, url)
            assert response.get_json()["error"]["code"] == "unauthenticated"
        elif method == "GET":
            assert response.status_code == 302 and "/login" in response.headers["Location"], (method, url)
        else:
            assert response.status_code == 400, (method, url)  # no CSRF token without a session
    assert walked == set(EXPECTED)


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
