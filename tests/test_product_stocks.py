"""A run's product kept as a stock: its element content is the output's, exactly, and draws take their share.

The product is the worked run of tests/test_runs.py: ICP-OES of a digest, 3750 mg/L Cd and 2750 mg/L Se in
4.0 mL, so 15 000 µg Cd and 11 000 µg Se (concentration × volume, by hand). A third of what is held is
taken by drawing 1.5 mL of 4.5 mL; the shares are worked below with integer arithmetic only, rounded half
to even (the rounding the ledger uses). CIAAW 2021 standard atomic weights where a formula enters:
Cd 112.414, Se 78.971.
"""

from __future__ import annotations

from click.testing import CliRunner
from sqlalchemy import func, select

from service.cli import main
from service.store import inventory
from service.store.audit import AuditEvent
from service.store.db import session_scope
from service.store.models import Procedure
from tests.conftest import Api, make_user
from tests.test_runs import _worked_run, approved  # noqa: F401 - the approved procedure's fixture

CD_UG, SE_UG = 15_000, 11_000  # 3750 mg/L × 4.0 mL; 2750 mg/L × 4.0 mL


def share(ug: int, part: int, whole: int) -> int:
    """ug × part / whole rounded half to even, in integers only."""
    quotient, rest = divmod(ug * part, whole)
    if 2 * rest > whole or (2 * rest == whole and quotient % 2):
        quotient += 1
    return quotient


def _masses(record) -> dict[str, int]:
    return {e["element"]: e["mass_ug"] for e in record["elements"] if e["mass_ug"]}


def _on_hand(app) -> dict[str, int]:
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        return inventory.element_totals(session)


def _audit_count(app) -> int:
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        return session.scalar(select(func.count()).select_from(AuditEvent))


def _stocked(ctx, before_stocking=lambda: None):
    """The worked run's measured output put into the inventory as 4.5 mL of a hexane dispersion."""
    r = ctx["researcher"]
    run, _ = _worked_run(ctx)
    output = r.call("GET", f"/runs/{run['id']}")["outputs"][0]
    place = r.call("GET", f"/stocks/{ctx['stocks']['CdO']}")["location_id"]
    cdse = ctx["admin"].substance_id("cadmium selenide")
    body = {"label": "P-1", "location_id": place, "amount": "4.5 mL", "substance_id": cdse}
    before_stocking()
    stock = r.call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock", body, 201)
    return run, output, stock, body


def test_a_measured_output_becomes_a_stock_holding_exactly_its_masses(approved, app):
    seen = []
    run, output, stock, _ = _stocked(approved, lambda: seen.append(_on_hand(app)))
    before = seen[0]
    assert _masses(output) == {"Cd": CD_UG, "Se": SE_UG}
    assert _masses(stock) == {"Cd": CD_UG, "Se": SE_UG}  # not 4.5 mL × a CdSe formula
    assert stock["origin"] == {"run_id": run["id"], "output_id": output["id"]}
    assert (stock["lab_id"], stock["substance"], stock["quantity"]) == (
        run["lab_id"], "cadmium selenide", {"value": 4.5, "unit": "mL", "kind": "volume"})
    after = _on_hand(app)
    assert (after["Cd"] - before["Cd"], after["Se"] - before["Se"]) == (CD_UG, SE_UG)
    with session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        created = session.scalars(select(AuditEvent).where(AuditEvent.entity == "stocks",
                                                           AuditEvent.entity_id == str(stock["id"]))).all()
        assert [e.action for e in created] == ["create"]
        assert created[0].after["origin_output_id"] == output["id"]


def test_drawing_a_third_takes_exactly_a_third_and_the_stock_keeps_the_rest(approved, app):
    _, _, stock, _ = _stocked(approved)
    before = _on_hand(app)
    run = approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"], "draws": [
        {"stock_id": stock["id"], "amount": "1.5 mL"}]}, 201)
    taken = _masses(run["draws"][0])
    assert taken == {"Cd": share(CD_UG, 1500, 4500), "Se": share(SE_UG, 1500, 4500)} == {"Cd": 5000, "Se": 3667}
    left = approved["researcher"].call("GET", f"/stocks/{stock['id']}")
    assert _masses(left) == {"Cd": CD_UG - 5000, "Se": SE_UG - 3667}
    assert left["quantity"]["value"] == 3.0
    after = _on_hand(app)
    assert {s: after[s] + taken[s] for s in taken} == {s: before[s] for s in taken}  # moved, not made or lost
    # The rest drawn in one go takes every microgram that is left.
    rest = approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"], "draws": [
        {"stock_id": stock["id"], "amount": "3 mL"}]}, 201)
    assert _masses(rest["draws"][0]) == {"Cd": 10_000, "Se": 7333}
    assert _masses(approved["researcher"].call("GET", f"/stocks/{stock['id']}")) == {}


def test_a_draw_by_mass_from_a_dispersion_is_refused_and_changes_nothing(approved, app):
    _, _, stock, _ = _stocked(approved)
    count = _audit_count(app)
    error = approved["researcher"].call("POST", "/runs", {"procedure_id": approved["proc"]["id"], "draws": [
        {"stock_id": stock["id"], "amount": "10 mg"}]}, 422)["error"]
    assert "draws[0].amount" in str(error) and "kept by volume" in error["message"]
    assert approved["researcher"].call("GET", f"/stocks/{stock['id']}") == stock
    assert _audit_count(app) == count


def test_an_output_becomes_one_stock_only(approved, app):
    run, output, stock, body = _stocked(approved)
    listed, count, on_hand = approved["admin"].call("GET", "/stocks?limit=500"), _audit_count(app), _on_hand(app)
    error = approved["researcher"].call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock",
                                        {**body, "label": "P-2"}, 409)["error"]
    assert f"stock {stock['label']}" in error["message"]
    assert approved["admin"].call("GET", "/stocks?limit=500") == listed
    assert (_audit_count(app), _on_hand(app)) == (count, on_hand)


def test_another_labs_location_and_a_missing_output_are_refused(approved, app, client):
    admin = approved["admin"]
    other = admin.call("POST", "/labs", {"code": "X-9", "name": "Other group"}, 201)["id"]
    elsewhere = admin.call("POST", "/locations", {"lab_id": other, "building": "X", "room": "X-9",
                                                  "storage": "shelf"}, 201)["id"]
    run, _ = _worked_run(approved)
    output = approved["researcher"].call("GET", f"/runs/{run['id']}")["outputs"][0]
    outsider = Api(client, make_user(app, "x@test.example", "researcher", lab_ids=[other]))
    count, on_hand = _audit_count(app), _on_hand(app)
    body = {"label": "P-X", "location_id": elsewhere, "amount": "4.0 mL"}
    error = admin.call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock", body, 422)["error"]
    assert error["details"][0]["field"] == "location_id"
    admin.call("POST", f"/runs/{run['id']}/outputs/999999/stock", {**body, "location_id": 1}, 404)
    outsider.call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock", body, 403)  # not their run
    assert (_audit_count(app), _on_hand(app)) == (count, on_hand)
    assert all(s["label"] != "P-X" for s in admin.call("GET", "/stocks?limit=500")["items"])


def test_without_substance_id_the_entry_made_of_the_outputs_elements_is_taken(approved):
    run, _ = _worked_run(approved)
    output = approved["researcher"].call("GET", f"/runs/{run['id']}")["outputs"][0]
    place = approved["researcher"].call("GET", f"/stocks/{approved['stocks']['CdO']}")["location_id"]
    stock = approved["researcher"].call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock",
                                        {"label": "P-3", "location_id": place, "amount": "48 mg"}, 201)
    assert (stock["substance"], stock["formula"], _masses(stock)) == ("cadmium selenide", "CdSe",
                                                                     {"Cd": CD_UG, "Se": SE_UG})


def test_a_procedure_drawing_from_a_product_stock_counts_its_cadmium(approved):
    _, _, stock, _ = _stocked(approved)
    r = approved["researcher"]
    proc = r.call("POST", "/procedures", {"lab_id": approved["proc"]["lab_id"], "title": "ZnS shell on P-1",
                                          "steps": [{"operation": "grow_shell", "temperature_c": 240,
                                                     "atmosphere": "argon"}],
                                          "draws": [{"stock_id": stock["id"], "amount": "1.5 mL"}]}, 201)
    per_batch = {e["element"]: e["mass_ug"] for e in proc["element_masses_per_batch"]}
    assert per_batch == {"Cd": 5000, "Se": 3667}
    cd = [f for f in proc["findings"] if f["measure"] == "element_mass:Cd"]
    assert cd and all(f["value"] == 5000 for f in cd)
    assert proc["caution"] and all(f["disclaimer"] for f in proc["findings"])


def test_a_by_difference_output_is_stocked_once_its_run_is_closed(approved):
    r = approved["researcher"]
    run = r.call("POST", "/runs", {"procedure_id": approved["proc"]["id"]}, 201)
    output = r.call("POST", f"/runs/{run['id']}/outputs", {"label": "dots", "method": "by_difference"}, 201)["outputs"][0]
    r.call("POST", f"/waste_containers/{approved['solid']}/entries", {
        "run_id": run["id"], "description": "tips", "mass": "5 g",
        "elements": [{"element": "Cd", "mass": "483 ug"}, {"element": "Se", "mass": "94 ug"}]}, 201)
    place = r.call("GET", f"/stocks/{approved['stocks']['CdO']}")["location_id"]
    body = {"label": "P-D", "location_id": place, "amount": "30 mg"}
    r.call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock", body, 409)  # open: the remainder may change
    r.call("POST", f"/runs/{run['id']}/close")
    stock = r.call("POST", f"/runs/{run['id']}/outputs/{output['id']}/stock", body, 201)
    # tests/test_runs.py: 22 483 µg Cd and 15 794 µg Se went in; the solids entry took 483 and 94.
    assert _masses(stock) == {"Cd": 22_483 - 483, "Se": 15_794 - 94}


def test_the_demo_core_shell_procedure_draws_the_cdse_run_product(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    assert runner.invoke(main, ["demo"]).exit_code == 0
    again = runner.invoke(main, ["demo"])
    assert "0 procedures added" in again.output and "0 product stocks added" in again.output
    from service.app import create_app
    from service.store import procedures

    app = create_app({"DATABASE_URL": sqlite_url})
    with app.test_request_context(), session_scope(app.extensions["dotledger.sessions"], write=False) as session:
        proc = session.scalar(select(Procedure).where(Procedure.title == "CdSe/ZnS core-shell growth"))
        cores = next(d for d in proc.draws if d.stock is not None and d.stock.label == "NG-P01")
        assert (cores.stock.origin_run_id, cores.amount_text, cores.stock.amount_text) == (1, "2.0 mL", "4.0 mL")
        held = {e.element: e.mass_ug for e in cores.stock.elements}
        # the demo's product: 70 % (rounded down) of the 22 496 µg Cd its run drew (tests/test_cli.py)
        assert held["Cd"] == 22_496 * 70 // 100 == 15_747
        totals = procedures.element_totals_ug(procedures.subject_of(proc))
        assert totals["Cd"] == share(15_747, 2000, 4000) == 7874
    app.extensions["dotledger.engine"].dispose()
