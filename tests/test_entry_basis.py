"""A waste entry's element masses given as a mass, an assay or a share of what its run leaves unaccounted.

Worked by hand from CIAAW 2021 standard atomic weights (Prohaska et al., Pure Appl. Chem. 94, 2022):
the run of ``tests.test_runs`` draws 0.2 mmol CdO, holding 0.2 mmol × 112.414 g/mol = 22.4828 mg Cd
(22 483 µg), and 0.2 mmol Se = 0.2 × 78.971 = 15.7942 mg (15 794 µg). Its product is an assay of
3750 mg/L Cd and 2750 mg/L Se in 4.0 mL: 15 000 µg Cd and 11 000 µg Se.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal

import pytest
from sqlalchemy import func, select

from service.store.audit import AuditEvent
from service.store.db import session_scope
from tests.conftest import http_post, threads_against_server
from tests.test_cli import sign_in
from tests.test_runs import approved  # noqa: F401 - the fixture: an approved CdSe procedure, stocks, two containers

CD_IN = int((Decimal("0.2") * Decimal("112.414") * 1000).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))  # 22 483 µg
SE_IN = int((Decimal("0.2") * Decimal("78.971") * 1000).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))  # 15 794 µg
CD_PRODUCT = 3750 * 4  # 3750 mg/L = 3750 µg/mL, × 4.0 mL
SE_PRODUCT = 2750 * 4


def _run_with_product(ctx) -> dict:
    r = ctx["researcher"]
    run = r.call("POST", "/runs", {"procedure_id": ctx["proc"]["id"]}, 201)
    r.call("POST", f"/runs/{run['id']}/outputs", {"label": "CdSe cores in hexane", "method": "measured", "assays": [
        {"element": "Cd", "concentration": "3750 mg/L", "volume": "4.0 mL"},
        {"element": "Se", "concentration": "2750 mg/L", "volume": "4.0 mL"}]}, 201)
    return run


def _entry(ctx, elements, *, run=None, expect=201, volume="15 mL"):
    body = {"description": "supernatant", "volume": volume, "elements": elements}
    if run is not None:
        body["run_id"] = run["id"]
    return ctx["researcher"].call("POST", f"/waste_containers/{ctx['liquid']}/entries", body, expect)


def _element(rows, symbol):
    return next(row for row in rows if row["element"] == symbol)


def _balance_row(ctx, run, symbol):
    return _element(ctx["researcher"].call("GET", f"/runs/{run['id']}/balance")["elements"], symbol)


def test_by_mass_is_stored_with_its_basis(approved):  # noqa: F811
    run = _run_with_product(approved)
    entry = _entry(approved, [{"element": "Cd", "mass": "2.5 mg"}], run=run)
    cd = _element(entry["elements"], "Cd")
    assert cd["mass_ug"] == 2500 and cd["basis"] == {"kind": "mass", "mass": "2.5 mg"}
    assert _balance_row(approved, run, "Cd")["unaccounted_ug"] == CD_IN - CD_PRODUCT - 2500


def test_by_assay_as_outputs_take_it(approved):  # noqa: F811
    # 12.5 mg/L = 12.5 µg/mL; × 4.0 mL = 50 µg (worked by hand)
    entry = _entry(approved, [{"element": "Cd", "concentration": "12.5 mg/L", "volume": "4.0 mL"}], volume="4.0 mL")
    cd = _element(entry["elements"], "Cd")
    assert cd["mass_ug"] == 50
    assert cd["basis"] == {"kind": "assay", "concentration": "12.5 mg/L", "volume": "4.0 mL"}
    container = approved["researcher"].call("GET", f"/waste_containers/{approved['liquid']}")
    assert _element(container["elements"], "Cd")["mass_ug"] == 50


def test_by_share_of_the_remainder(approved):  # noqa: F811
    run = _run_with_product(approved)
    _entry(approved, [{"element": "Cd", "mass": "2 mg"}, {"element": "Se", "mass": "1 mg"}], run=run)
    cd_left, se_left = CD_IN - CD_PRODUCT - 2000, SE_IN - SE_PRODUCT - 1000  # 5 483 µg, 3 794 µg
    entry = _entry(approved, [{"element": "Cd", "share_percent": 80}, {"element": "Se", "share_percent": 12.5}], run=run)
    cd_share = int((Decimal(cd_left) * Decimal("0.80")).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))  # 4386.4
    se_share = int((Decimal(se_left) * Decimal("0.125")).quantize(Decimal(1), rounding=ROUND_HALF_EVEN))  # 474.25
    cd, se = _element(entry["elements"], "Cd"), _element(entry["elements"], "Se")
    assert (cd["mass_ug"], se["mass_ug"]) == (cd_share, se_share) == (4386, 474)
    assert cd["basis"] == {"kind": "share", "percent": 80, "of_ug": cd_left, "remaining_ug": cd_left - cd_share}
    assert se["basis"]["of_ug"] == se_left and se["basis"]["remaining_ug"] == se_left - se_share
    assert "80.0 % of the 5.483 mg" in cd["basis_note"]
    assert _balance_row(approved, run, "Cd")["unaccounted_ug"] == cd_left - cd_share
    # 100 % takes exactly what is left; the balance then shows nothing unaccounted
    _entry(approved, [{"element": "Cd", "share_percent": 100}], run=run)
    assert _balance_row(approved, run, "Cd")["unaccounted_ug"] == 0


def _state(app, client_api, container_id):
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        events = session.scalar(select(func.count()).select_from(AuditEvent))
    container = client_api.call("GET", f"/waste_containers/{container_id}")
    stocks = client_api.call("GET", "/stocks?limit=500")["items"]
    return events, container, [(s["id"], s["amount"]) for s in stocks]


def test_more_than_the_run_has_left_is_refused_and_changes_nothing(app, approved):  # noqa: F811
    run = _run_with_product(approved)
    _entry(approved, [{"element": "Cd", "mass": "4 mg"}], run=run)
    before = _state(app, approved["admin"], approved["liquid"])
    error = _entry(approved, [{"element": "Se", "mass": "1 mg"}, {"element": "Cd", "mass": "500 mg"}], run=run,
                   expect=422)["error"]
    left = CD_IN - CD_PRODUCT - 4000  # 3 483 µg
    assert [d["field"] for d in error["details"]] == ["elements[1]"]
    assert "the run has 3.483 mg Cd left unaccounted; this entry gives 500 mg" in error["message"] + str(error["details"])
    assert left == 3483
    # one microgram over is refused too, exactly the remainder is not
    _entry(approved, [{"element": "Cd", "mass": f"{left + 1} ug"}], run=run, expect=422)
    assert _state(app, approved["admin"], approved["liquid"]) == before
    _entry(approved, [{"element": "Cd", "mass": f"{left} ug"}], run=run)


def test_share_needs_a_run(approved):  # noqa: F811
    error = _entry(approved, [{"element": "Cd", "share_percent": 50}], expect=422)["error"]
    assert any(d["field"] == "elements" and "run_id" in d["message"] for d in error["details"]), error


@pytest.mark.parametrize("row, field", [
    ({"element": "Cd", "share_percent": 0}, "elements.0.share_percent"),
    ({"element": "Cd", "share_percent": 100.5}, "elements.0.share_percent"),
    ({"element": "Cd", "concentration": "12.5 mg/L"}, "elements.0"),
    ({"element": "Cd", "mass": "1 mg", "share_percent": 5}, "elements.0"),
    ({"element": "Cd"}, "elements.0"),
    ({"element": "P", "share_percent": 10}, "elements[0].element"),  # the balance does not follow phosphorus
])
def test_bad_element_rows(approved, row, field):  # noqa: F811
    run = _run_with_product(approved)
    error = _entry(approved, [row], run=run, expect=422)["error"]
    assert any(d["field"] == field for d in error["details"]), error


def test_a_share_of_nothing_is_refused(approved):  # noqa: F811
    run = _run_with_product(approved)
    _entry(approved, [{"element": "Cd", "share_percent": 100}], run=run)
    error = _entry(approved, [{"element": "Cd", "share_percent": 10}], run=run, expect=422)["error"]
    assert error["details"][0]["field"] == "elements[0]" and "no Cd left" in str(error)


def test_clean_up_entry_without_a_run_is_accepted(approved):  # noqa: F811
    _run_with_product(approved)
    entry = _entry(approved, [{"element": "Cd", "mass": "500 mg"}])  # a bench clean-up: no run to measure against
    assert entry["run_id"] is None and _element(entry["elements"], "Cd")["mass_ug"] == 500_000


def test_a_reversal_gives_the_share_back(approved):  # noqa: F811
    run = _run_with_product(approved)
    left = CD_IN - CD_PRODUCT
    entry = _entry(approved, [{"element": "Cd", "share_percent": 100}], run=run)
    reversal = approved["researcher"].call(
        "POST", f"/waste_containers/{approved['liquid']}/entries/{entry['id']}/reverse", {"reason": "wrong run"}, 201)
    cd = _element(reversal["elements"], "Cd")
    assert cd["mass_ug"] == -left and cd["basis"] == {"kind": "reversal", "entry_id": entry["id"]}
    assert _balance_row(approved, run, "Cd")["unaccounted_ug"] == left
    again = _entry(approved, [{"element": "Cd", "share_percent": 50}], run=run)
    assert _element(again["elements"], "Cd")["mass_ug"] == 3742  # 7 483 × 0.5 = 3 741.5 → 3 742 (half to even)


def test_the_container_page_shows_the_basis(app, client, approved):  # noqa: F811
    run = _run_with_product(approved)
    _entry(approved, [{"element": "Cd", "share_percent": 80}], run=run)
    _entry(approved, [{"element": "Se", "concentration": "12.5 mg/L", "volume": "4.0 mL"}], volume="4.0 mL")
    sign_in(client, "res@test.example", "correct horse battery")
    page = client.get(f"/waste/{approved['liquid']}").get_data(as_text=True)
    assert "80.0 % of the 7.483 mg the run left unaccounted" in page
    assert "12.5 mg/L × 4.0 mL" in page


def test_concurrent_shares_of_one_run_in_two_containers_take_the_remainder_once(app, approved):  # noqa: F811
    """Eight threads each ask for 100 % of the run's Cd remainder, into two containers, over real HTTP."""
    run = _run_with_product(approved)
    first = approved["admin"].call("GET", f"/waste_containers/{approved['liquid']}")
    containers = [first["id"], approved["admin"].call("POST", "/waste_containers", {
        "label": "R-L2", "lab_id": first["lab_id"], "location_id": first["location_id"],
        "stream": "non_halogenated_solvent_heavy_metals", "capacity": "10 L"}, 201)["id"]]
    answers: list[int] = []

    def worker(port: int, n: int) -> None:
        answers.append(http_post(port, f"/waste_containers/{containers[n % 2]}/entries", {
            "description": f"supernatant {n}", "volume": "10 mL", "run_id": run["id"],
            "elements": [{"element": "Cd", "share_percent": 100}]}, approved["researcher"].token))

    threads_against_server(app, worker, 8, timeout=120)
    assert sorted(answers) == [201] + [422] * 7
    row = _balance_row(approved, run, "Cd")
    assert row["waste_ug"] == CD_IN - CD_PRODUCT and row["unaccounted_ug"] == 0
