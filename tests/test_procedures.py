"""The procedure workflow through the API, with the shipped rule packs.

Physical values behind the findings come from rules/substances.yaml (sources named there):
1-octadecene flash point ≈149 °C (from memory — verify), n-hexane −22 °C and toluene 4 °C
(Prudent Practices in the Laboratory / NIOSH Pocket Guide, seen).
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal

import pytest

from service.store import audit
from service.store.db import session_scope
from tests.conftest import Api, make_user


@pytest.fixture
def lab(app, client):
    """A lab with a researcher, a safety officer, stocks and a Cd oleate solution."""
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab_id = admin.call("POST", "/labs", {"code": "N-1", "name": "Nano group"}, 201)["id"]
    place = admin.call("POST", "/locations", {"lab_id": lab_id, "building": "N", "room": "N-1",
                                              "storage": "cabinet"}, 201)["id"]
    stocks = {}
    for label, name, amount in [("CdO", "cadmium oxide", "25 g"), ("Se", "selenium", "50 g"),
                                ("TOP", "trioctylphosphine", "100 mL"), ("ODE", "1-octadecene", "1 L"),
                                ("OA", "oleic acid", "500 mL"), ("HEX", "n-hexane", "1 L"),
                                ("TOL", "toluene", "1 L"), ("ACE", "acetone", "4 L")]:
        stocks[label] = admin.call("POST", "/stocks", {"label": label, "substance_id": admin.substance_id(name),
                                                       "lab_id": lab_id, "location_id": place, "amount": amount}, 201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab_id]))
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    return {"id": lab_id, "stocks": stocks, "researcher": researcher, "officer": officer, "admin": admin}


def cdse_core(lab, *, atmosphere="argon", temperature=300.0, solvent="ODE", cdo="25.7 mg", extra=()):
    """A CdSe core synthesis as planned at scale 1 (0.2 mmol CdO = 25.7 mg)."""
    s = lab["stocks"]
    return {
        "lab_id": lab["id"], "title": "CdSe cores by hot injection",
        "steps": [
            {"operation": "charge", "note": "CdO, oleic acid and solvent into the flask"},
            {"operation": "degas", "temperature_c": 120, "atmosphere": "vacuum", "duration_min": 30},
            {"operation": "heat", "temperature_c": temperature, "atmosphere": atmosphere},
            {"operation": "inject", "temperature_c": temperature - 30, "atmosphere": atmosphere},
            {"operation": "cool", "atmosphere": atmosphere},
            {"operation": "precipitate", "note": "acetone"},
            {"operation": "centrifuge", "duration_min": 10},
        ],
        "draws": [{"stock_id": s["CdO"], "amount": cdo}, {"stock_id": s["OA"], "amount": "0.6 mL"},
                  {"stock_id": s[solvent], "amount": "10 mL"}, {"stock_id": s["Se"], "amount": "15.8 mg"},
                  {"stock_id": s["TOP"], "amount": "1 mL"}, *extra],
        "waste_plan": [{"stream": "non-halogenated solvent with heavy metals", "contents": "supernatants, acetone washes"},
                       {"stream": "contaminated solids", "contents": "gloves, wipes, filter paper"}],
    }


def _measures(procedure):
    return {f["measure"]: f for f in procedure["findings"]}


def test_register_submit_approve_with_three_users(app, lab):
    researcher, officer = lab["researcher"], lab["officer"]
    proc = researcher.call("POST", "/procedures", cdse_core(lab), 201)
    assert proc["state"] == "draft"
    cd = next(e for e in proc["element_masses_per_batch"] if e["element"] == "Cd")
    # 25.7 mg CdO at 100 % × 112.414/128.413 = 22.498 mg Cd (CIAAW 2021)
    assert cd["mass_ug"] == pytest.approx(22_498, abs=1)
    assert proc["rule_packs"] and proc["caution"]
    assert all(f["disclaimer"] for f in proc["findings"])
    submitted = researcher.call("POST", f"/procedures/{proc['id']}/submit", {}, 200)
    assert submitted["state"] == "submitted"
    researcher.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "mine"}, 403)  # own approval
    queue = officer.call("GET", "/review_queue")["items"]
    assert [p["id"] for p in queue] == [proc["id"]]
    # A step at 300 °C above 1-octadecene's flash point (≈149 °C, from memory) and cadmium oxide, Carc. 1B
    # (CLP Annex VI, from memory), each need the safety officer's review under the site pack.
    assert submitted["highest_level"] == "review"
    officer.call("POST", f"/procedures/{proc['id']}/approve", {}, 422)  # review needs a comment
    approved = officer.call("POST", f"/procedures/{proc['id']}/approve",
                            {"comment": "Argon line checked; heating mantle with controller."})
    assert approved["state"] == "approved" and approved["decided_by_id"] is not None
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        assert audit.verify_chain(session).ok
        actions = [e.action for e in audit.list_events(session, entity="procedures", limit=100)]
    assert "state_change:draft->submitted" in actions and "state_change:submitted->approved" in actions
    decisions = officer.call("GET", f"/procedures/{proc['id']}/decisions")["items"]
    assert [(d["from_state"], d["to_state"]) for d in decisions] == [("draft", "submitted"), ("submitted", "approved")]


def test_hot_ode_gives_the_flash_point_finding(lab):
    # 300 °C against 1-octadecene's closed-cup flash point (≈149 °C, from memory — verify): 151 degrees above.
    body = cdse_core(lab)
    body["draws"] = [d for d in body["draws"] if d["stock_id"] in (lab["stocks"]["CdO"], lab["stocks"]["ODE"])]
    proc = lab["researcher"].call("POST", "/procedures", body, 201)
    finding = _measures(proc)["max_temperature_minus_flash_point"]
    assert finding["value"] == pytest.approx(151, abs=0.5) and "1-octadecene" in finding["detail"]
    assert finding["level"] == "review"


@pytest.mark.parametrize("solvent", ["HEX", "TOL"])
def test_low_flash_point_solvents_at_300_c_give_the_finding(lab, solvent):
    proc = lab["researcher"].call("POST", "/procedures", cdse_core(lab, solvent=solvent), 201)
    finding = _measures(proc)["max_temperature_minus_flash_point"]
    # n-hexane −22 °C, toluene 4 °C: 300 − (−22) = 322 and 300 − 4 = 296 degrees above
    assert finding["value"] == pytest.approx({"HEX": 322, "TOL": 296}[solvent], abs=0.5)


def test_air_sensitive_without_inert_gas_blocks_submission(lab):
    body = cdse_core(lab, atmosphere="air")
    body["steps"][1]["atmosphere"] = "air"  # no vacuum or inert step anywhere
    proc = lab["researcher"].call("POST", "/procedures", body, 201)
    assert proc["highest_level"] == "block"
    error = lab["researcher"].call("POST", f"/procedures/{proc['id']}/submit", {}, 409)["error"]
    assert any(f["measure"] == "air_sensitive_without_inert_step" for f in error["details"]["findings"])


def test_changes_requested_then_revised_and_resubmitted(lab):
    researcher, officer = lab["researcher"], lab["officer"]
    proc = researcher.call("POST", "/procedures", cdse_core(lab), 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    researcher.call("PATCH", f"/procedures/{proc['id']}", {"title": "while submitted"}, 409)
    officer.call("POST", f"/procedures/{proc['id']}/request_changes", {}, 422)  # a comment is required
    officer.call("POST", f"/procedures/{proc['id']}/request_changes", {"comment": "Add the quench step."})
    edited = researcher.call("PATCH", f"/procedures/{proc['id']}", {"title": "CdSe cores, with quench"})
    assert edited["state"] == "changes_requested" and edited["revision"] == 1
    assert researcher.call("POST", f"/procedures/{proc['id']}/submit")["state"] == "submitted"


def test_editing_an_approved_procedure_makes_a_new_revision(lab):
    researcher, officer = lab["researcher"], lab["officer"]
    proc = researcher.call("POST", "/procedures", cdse_core(lab), 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    officer.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "ok"})
    revision = researcher.call("PATCH", f"/procedures/{proc['id']}", {"scale": 3}, 201)
    assert (revision["revision"], revision["state"], revision["revision_of_id"]) == (2, "draft", proc["id"])
    assert researcher.call("GET", f"/procedures/{proc['id']}")["state"] == "approved"  # old one still readable
    assert "scale_factor_over_last_approved" in _measures(revision)  # 3× the approved scale
    researcher.call("PATCH", f"/procedures/{proc['id']}", {"scale": 2}, 409)  # one open revision at a time
    researcher.call("POST", f"/procedures/{revision['id']}/submit")
    officer.call("POST", f"/procedures/{revision['id']}/approve", {"comment": "scale-up reviewed"})
    assert researcher.call("GET", f"/procedures/{proc['id']}")["state"] == "retired"
    family = researcher.call("GET", f"/procedures/{revision['id']}/revisions")["items"]
    assert [(p["revision"], p["state"]) for p in family] == [(1, "retired"), (2, "approved")]


def test_scale_up_preview_lists_thresholds_crossed(lab, app):
    proc = lab["researcher"].call("POST", "/procedures", cdse_core(lab), 201)
    preview = lab["researcher"].call("GET", f"/procedures/{proc['id']}/preview?scales=1,10,1000")
    by_scale = {row["scale"]: row for row in preview["scales"]}
    cd = lambda row: next(e["mass_ug"] for e in row["element_masses_per_batch"] if e["element"] == "Cd")  # noqa: E731
    assert cd(by_scale[10.0]) == pytest.approx(10 * cd(by_scale[1.0]), abs=10)
    rules = app.extensions["dotledger.rules"]
    cd_rules = [r for r in rules.rules_for("procedure") if r.measure == "element_mass:Cd"]
    crossed_at_1000 = {f["rule_id"] for f in by_scale[1000.0]["findings"] if f["measure"] == "element_mass:Cd"}
    crossed_at_1 = {f["rule_id"] for f in by_scale[1.0]["findings"] if f["measure"] == "element_mass:Cd"}
    assert crossed_at_1 < crossed_at_1000 <= {r.id for r in cd_rules}
    lab["researcher"].call("GET", f"/procedures/{proc['id']}/preview?scales=0", expect=422)
    lab["researcher"].call("GET", f"/procedures/{proc['id']}/preview?scales=abc", expect=422)


def test_scale_up_preview_rounds_the_scaled_mass_once(lab):
    # 22.2 mg SeO2 at scale 1 holds 15 798.6 µg Se; rounding that first and multiplying by 5 would give
    # 78 995 µg. The exact value, from CIAAW 2021 standard atomic weights (Se 78.971, O 15.999;
    # Prohaska et al., Pure Appl. Chem. 94, 2022): 111 000 µg × 78.971 / 110.969 = 78 993.06 → 78 993 µg.
    admin = lab["admin"]
    place = admin.call("GET", f"/locations?lab_id={lab['id']}")["items"][0]["id"]
    seo2 = admin.call("POST", "/stocks", {"label": "SeO2", "substance_id": admin.substance_id("selenium dioxide"),
                                          "lab_id": lab["id"], "location_id": place, "amount": "5 g"}, 201)["id"]
    body = cdse_core(lab)
    body["draws"] = [{"stock_id": seo2, "amount": "22.2 mg"}]
    proc = lab["researcher"].call("POST", "/procedures", body, 201)
    preview = lab["researcher"].call("GET", f"/procedures/{proc['id']}/preview?scales=1,5")
    se = {row["scale"]: next(e["mass_ug"] for e in row["element_masses_per_batch"] if e["element"] == "Se")
          for row in preview["scales"]}
    exact = Decimal("22200") * 5 * Decimal("78.971") / (Decimal("78.971") + 2 * Decimal("15.999"))
    assert se[5.0] == int(exact.quantize(Decimal(1), rounding=ROUND_HALF_EVEN)) == 78_993
    assert se[1.0] == 15_799  # 15 798.61 µg, rounded once


def test_review_queue_is_oldest_first(lab):
    researcher, officer = lab["researcher"], lab["officer"]
    ids = []
    for title in ("first", "second", "third"):
        body = {**cdse_core(lab), "title": f"CdSe {title}"}
        proc = researcher.call("POST", "/procedures", body, 201)
        ids.append(proc["id"])
    for ident in (ids[1], ids[0], ids[2]):
        researcher.call("POST", f"/procedures/{ident}/submit")
    queue = officer.call("GET", "/review_queue")["items"]
    assert [p["id"] for p in queue] == [ids[1], ids[0], ids[2]]
    assert all(p["highest_level"] for p in queue)
    researcher.call("GET", "/review_queue", expect=403)


@pytest.mark.parametrize(
    "change, field",
    [
        ({"draws": [{"stock_id": 99999, "amount": "1 g"}]}, "draws[0].stock_id"),
        ({"draws": [{"amount": "1 g"}]}, "draws.0"),  # neither a stock nor a mixture
        ({"steps": [{"operation": "teleport"}]}, "steps.0.operation"),
        ({"steps": []}, "steps"),
    ],
)
def test_bad_procedure_bodies(lab, change, field):
    error = lab["researcher"].call("POST", "/procedures", {**cdse_core(lab), **change}, 422)["error"]
    assert any(d.get("field") == field for d in error["details"]), error


def test_a_procedure_in_a_lab_of_which_the_researcher_is_no_member_is_refused(lab):
    error = lab["researcher"].call("POST", "/procedures", {**cdse_core(lab), "lab_id": 99999}, 403)["error"]
    assert error["code"] == "forbidden" and "lab_id" in error["details"], error


@pytest.mark.parametrize("amount, words", [("0.2 mol/L", "expected a mass or volume"), ("25", "needs a unit")])
def test_a_draw_amount_must_be_a_mass_or_volume(lab, amount, words):
    error = lab["researcher"].call("POST", "/procedures", cdse_core(lab, cdo=amount), 422)["error"]
    # Checked by the schema (before any parsing in the store): the detail names the draw's amount.
    assert words in error["details"][0]["message"] and error["details"][0]["field"] == "draws.0.amount"


def test_nobody_approves_their_own_procedure_even_as_safety_officer(app, lab):
    from service.errors import Forbidden
    from service.store import procedures
    from service.store.models import Procedure, User

    proc = lab["researcher"].call("POST", "/procedures", cdse_core(lab), 201)
    lab["researcher"].call("POST", f"/procedures/{proc['id']}/submit")
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        record = session.get(Procedure, proc["id"])
        officer = session.query(User).filter(User.email == "so@test.example").one()
        record.researcher_id = officer.id  # the officer wrote this one
        session.flush()
        with pytest.raises(Forbidden, match="nobody approves their own procedure"):
            procedures.transition(session, record, "approve", officer, "looks fine", app.extensions["dotledger.rules"])


def test_preview_command(sqlite_url, monkeypatch):
    from click.testing import CliRunner

    from service.cli import main

    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    assert runner.invoke(main, ["demo"]).exit_code == 0
    result = runner.invoke(main, ["preview", "1", "--scale", "1,500"])
    assert result.exit_code == 0, result.output
    assert "× 1:" in result.output and "× 500:" in result.output
    at_500 = result.output.split("× 500:", 1)[1]
    assert "site.cd-per-batch-block" in at_500 and "highest finding block" in at_500  # 500 × 22.5 mg Cd > 5 g
    assert "safety officer" in result.output
    bad = runner.invoke(main, ["preview", "1", "--scale", "0"])
    assert bad.exit_code == 2 and "above 0" in bad.output
    missing = runner.invoke(main, ["preview", "999"])
    assert missing.exit_code == 1 and "no procedure with id 999" in missing.output


def test_withdraw_a_submitted_procedure(app, lab):
    researcher, officer, admin = lab["researcher"], lab["officer"], lab["admin"]
    proc = researcher.call("POST", "/procedures", cdse_core(lab), 201)
    error = researcher.call("POST", f"/procedures/{proc['id']}/withdraw", {}, 409)["error"]  # a draft: nothing to withdraw
    assert error["code"] == "conflict" and error["details"] == [{"field": "state", "value": "draft"}]
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    other = Api(researcher.client, make_user(app, "other@test.example", "researcher", lab_ids=[lab["id"]]))
    error = other.call("POST", f"/procedures/{proc['id']}/withdraw", {}, 403)["error"]  # same lab, not theirs
    assert "researcher" in error["message"]
    officer.call("POST", f"/procedures/{proc['id']}/withdraw", {}, 403)  # the matrix: the officer decides instead
    withdrawn = researcher.call("POST", f"/procedures/{proc['id']}/withdraw")  # no comment needed
    assert withdrawn["state"] == "draft" and withdrawn["submitted_at"] is None
    assert officer.call("GET", "/review_queue")["items"] == []
    assert researcher.call("PATCH", f"/procedures/{proc['id']}", {"title": "CdSe cores, revised"})["state"] == "draft"
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    assert admin.call("POST", f"/procedures/{proc['id']}/withdraw")["state"] == "draft"  # an administrator may
    decisions = officer.call("GET", f"/procedures/{proc['id']}/decisions")["items"]
    assert [(d["from_state"], d["to_state"]) for d in decisions] == [
        ("draft", "submitted"), ("submitted", "draft"), ("draft", "submitted"), ("submitted", "draft")]


def test_acetone_of_the_precipitation_is_not_in_the_hot_flask(lab):
    # Acetone (flash point −20 °C, NAS 2016 App. D, seen) added at the precipitate step (position 5), after
    # the last heated step, and TOP (≈146 °C, from memory) at the injection (position 3, 270 °C: 124 degrees):
    # the 300 °C step is judged over 1-octadecene (≈149 °C, from memory) alone: 151 degrees.
    body = cdse_core(lab, extra=[{"stock_id": lab["stocks"]["ACE"], "amount": "40 mL", "step": 5}])
    body["draws"][4]["step"] = 3
    proc = lab["researcher"].call("POST", "/procedures", body, 201)
    finding = _measures(proc)["max_temperature_minus_flash_point"]
    assert finding["value"] == pytest.approx(151, abs=0.5) and "acetone" not in finding["detail"]
    assert [d["step"] for d in proc["draws"]] == [None, None, None, None, 3, 5]
    # the same draw without a step is in the flask from the start: 300 − (−20) = 320
    del body["draws"][-1]["step"]
    unlinked = lab["researcher"].call("POST", "/procedures", body, 201)
    assert _measures(unlinked)["max_temperature_minus_flash_point"]["value"] == pytest.approx(320, abs=0.5)


def test_a_draw_step_must_name_a_step(lab):
    body = cdse_core(lab, extra=[{"stock_id": lab["stocks"]["ACE"], "amount": "40 mL", "step": 7}])  # 7 steps: 0–6
    error = lab["researcher"].call("POST", "/procedures", body, 422)["error"]
    assert [d["field"] for d in error["details"]] == ["draws[5].step"] and "7 steps" in error["message"]
    body["draws"][-1]["step"] = -1  # below the schema's bound of 0
    error = lab["researcher"].call("POST", "/procedures", body, 422)["error"]
    assert any(d.get("field") == "draws.5.step" for d in error["details"]), error
    body["draws"][-1]["step"] = 6  # the last step: accepted
    proc = lab["researcher"].call("POST", "/procedures", body, 201)
    # fewer steps in a later edit would leave the draw pointing at nothing: refused, naming the draw
    error = lab["researcher"].call("PATCH", f"/procedures/{proc['id']}", {"steps": body["steps"][:3]}, 422)["error"]
    assert [d["field"] for d in error["details"]] == ["draws[5].step"]


def test_a_new_revision_keeps_the_draw_steps(lab):
    researcher, officer = lab["researcher"], lab["officer"]
    body = cdse_core(lab, extra=[{"stock_id": lab["stocks"]["ACE"], "amount": "40 mL", "step": 5}])
    proc = researcher.call("POST", "/procedures", body, 201)
    researcher.call("POST", f"/procedures/{proc['id']}/submit")
    officer.call("POST", f"/procedures/{proc['id']}/approve", {"comment": "Argon line and controller checked."})
    revision = researcher.call("PATCH", f"/procedures/{proc['id']}", {"title": "CdSe cores, revision 2"}, 201)
    assert revision["revision"] == 2 and [d["step"] for d in revision["draws"]] == [None] * 5 + [5]


def test_draw_amounts_are_stored_parsed_and_the_migration_fills_them_alike(app, lab, monkeypatch):
    """Each planned draw keeps its amount parsed at write time, in exact µg (a mass) or µL (a volume);
    revision 0021 computes the same for draws written before it. Expected values by the SI prefixes
    (1 mg = 1000 µg, 1 mL = 1000 µL; BIPM SI Brochure, 9th ed., Table 7), computed here by hand."""
    from alembic import command
    from alembic.config import Config
    from sqlalchemy import select

    from service.store.db import MIGRATIONS, upgrade
    from service.store.models import ReagentDraw

    proc = lab["researcher"].call("POST", "/procedures", cdse_core(lab, cdo="25.75 mg"), 201)
    expected = {"25.75 mg": ("mass", Decimal("25750")), "0.6 mL": ("volume", Decimal("600")),
                "10 mL": ("volume", Decimal("10000")), "15.8 mg": ("mass", Decimal("15800")),
                "1 mL": ("volume", Decimal("1000"))}

    def stored() -> dict:
        with session_scope(app.extensions["dotledger.sessions"]) as s:
            return {d.amount_text: (d.amount_kind, d.amount_micro) for d in
                    s.scalars(select(ReagentDraw).where(ReagentDraw.procedure_id == proc["id"]))}

    assert stored() == expected
    url = app.config["DATABASE_URL"]
    app.extensions["dotledger.engine"].dispose()
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    command.downgrade(config, "0020_monthly_totals")  # the draws as stored before the revision: text only
    upgrade(url)
    assert stored() == expected
    # a read parses no amount text and answers the same masses as at write time: 25.75 mg CdO × 112.414/128.413
    # (CIAAW 2021), the stock's rows shared in proportion (a µg of rounding either way)
    from service.chem import content
    from service.store import inventory, procedures

    def refused(*args, **kwargs):
        raise AssertionError(f"an amount text was parsed on a read: {args}")

    for module in (inventory, procedures, content):
        monkeypatch.setattr(module, "parse_quantity", refused)
    again = lab["researcher"].call("GET", f"/procedures/{proc['id']}")
    cd = next(e for e in again["element_masses_per_batch"] if e["element"] == "Cd")
    assert cd["mass_ug"] == pytest.approx(float(Decimal("25750") * Decimal("112.414") / Decimal("128.413")), abs=1)
