"""The site element ledger on a worked month, every expected value computed here by hand.

Atomic weights: CIAAW 2021 standard atomic weights, abridged (Prohaska et al., Pure Appl. Chem. 94,
2022): Cd 112.414, O 15.999, Se 78.971, Cl 35.45. Element content of a pure substance = mass × purity ×
mass fraction, rounded once (half to even) to whole µg; a draw takes the source's stored µg in
proportion to the amount drawn over the amount held, rounded once (half to even) — the proportional
share written out below in integers only. Assays are concentration × volume (1 mg/L = 1 µg/mL).

The month: receive 5.000 g CdO, 5.000 g Se and 1.000 g of an expired CdCl2 (99 %); prepare 20 mL of
0.2 mol/L cadmium oleate and 10 mL of 1.0 mol/L TOP-Se from them; three CdSe runs; the first run's
product into the inventory; a ZnS-shell run that draws half of it; waste entries by mass, by assay and
by share of the remainder; a declared loss; the expired CdCl2 disposed of into the solids container;
the rest of the product shipped out. The ledger for Cd and Se must close to the microgram and each
figure's records must add up to it.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal
from fractions import Fraction

import pytest

from tests.conftest import Api, make_user

CD, O, SE, CL = Decimal("112.414"), Decimal("15.999"), Decimal("78.971"), Decimal("35.45")
FIGURES = ("opening", "received", "into_products", "into_waste", "shipped_out", "declared_losses", "corrections",
           "closing", "unaccounted")


def whole_ug(value: Decimal) -> int:
    return int(value.quantize(Decimal(1), rounding=ROUND_HALF_EVEN))


def share(ug: int, part: int, whole: int) -> int:
    """ug × part / whole rounded half to even (Python's round of an exact fraction does exactly that)."""
    return round(Fraction(ug * part, whole))


# Received, by hand.
CD_IN_CDO = whole_ug(Decimal(5_000_000) * CD / (CD + O))  # 5.000 g CdO: 4 377 201 µg Cd
SE_IN_SE = 5_000_000  # 5.000 g Se, 100 %
CD_IN_CDCL2 = whole_ug(Decimal(1_000_000) * Decimal("0.99") * CD / (CD + 2 * CL))  # 1.000 g CdCl2 at 99 %


class Holder:
    """A stock or mixture as this test follows it: amount held (µg or µL) and its Cd and Se (µg)."""

    def __init__(self, micro: int, cd: int = 0, se: int = 0) -> None:
        self.micro, self.cd, self.se = micro, cd, se

    def draw(self, micro: int) -> tuple[int, int]:
        cd, se = share(self.cd, micro, self.micro), share(self.se, micro, self.micro)
        self.micro, self.cd, self.se = self.micro - micro, self.cd - cd, self.se - se
        return cd, se


def ug(record: dict, element: str) -> int:
    return next((e["mass_ug"] for e in record["elements"] if e["element"] == element), 0)


@pytest.fixture
def month(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab = admin.call("POST", "/labs", {"code": "L-1", "name": "Ledger lab"}, 201)["id"]
    shelf = admin.call("POST", "/locations", {"lab_id": lab, "building": "L", "room": "L-1", "storage": "shelf"},
                       201)["id"]
    saa = admin.call("POST", "/locations", {"lab_id": lab, "building": "L", "room": "L-1", "storage": "hood SAA",
                                            "kind": "satellite_accumulation_area"}, 201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab]))
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    manager = Api(client, make_user(app, "lm@test.example", "lab_manager"))

    def stock(label, name, amount, **extra):
        return admin.call("POST", "/stocks", {"label": label, "substance_id": admin.substance_id(name), "lab_id": lab,
                                              "location_id": shelf, "amount": amount, **extra}, 201)

    stocks = {"CdO": stock("CdO", "cadmium oxide", "5.000 g"), "Se": stock("Se", "selenium", "5.000 g"),
              "CdCl2": stock("CdCl2-OLD", "cadmium chloride", "1.000 g", purity_percent=99.0,
                             expires_on="2020-01-31"),
              "OA": stock("OA", "oleic acid", "100 mL"), "ODE": stock("ODE", "1-octadecene", "500 mL"),
              "TOP": stock("TOP", "trioctylphosphine", "100 mL"), "S": stock("S", "sulfur", "10 g"),
              "Zn": stock("ZnSt", "zinc stearate", "10 g")}
    liquid = admin.call("POST", "/waste_containers", {"label": "L-LIQ", "lab_id": lab, "location_id": saa,
                                                      "stream": "non_halogenated_solvent_heavy_metals",
                                                      "capacity": "10 L"}, 201)["id"]
    solid = admin.call("POST", "/waste_containers", {"label": "L-SOL", "lab_id": lab, "location_id": saa,
                                                     "stream": "contaminated_solids", "capacity": "5 kg"}, 201)["id"]
    return {"admin": admin, "researcher": researcher, "officer": officer, "manager": manager, "lab": lab,
            "shelf": shelf, "stocks": stocks, "liquid": liquid, "solid": solid}


def _approve(ctx, title: str, draws: list[dict]) -> int:
    r = ctx["researcher"]
    steps = [{"operation": "heat", "temperature_c": 300, "atmosphere": "argon"},
             {"operation": "inject", "temperature_c": 270, "atmosphere": "argon"},
             {"operation": "precipitate"}, {"operation": "centrifuge"}]
    proc = r.call("POST", "/procedures", {"lab_id": ctx["lab"], "title": title, "steps": steps, "draws": draws}, 201)
    r.call("POST", f"/procedures/{proc['id']}/submit")
    ctx["officer"].call("POST", f"/procedures/{proc['id']}/approve", {"comment": "worked month"})
    return proc["id"]


def _entry(ctx, container: str, run_id, description: str, elements: list[dict], **amount) -> dict:
    body = {"run_id": run_id, "description": description, "elements": elements, **amount}
    return ctx["researcher"].call("POST", f"/waste_containers/{ctx[container]}/entries", body, 201)


def _work_the_month(ctx) -> dict:
    """Do the month through the API; return the expected ledger figures for Cd and Se, worked here."""
    r, s = ctx["researcher"], ctx["stocks"]
    cdo, se_stock = Holder(5_000_000, cd=CD_IN_CDO), Holder(5_000_000, se=SE_IN_SE)
    assert (ug(s["CdO"], "Cd"), ug(s["Se"], "Se"), ug(s["CdCl2"], "Cd")) == (CD_IN_CDO, SE_IN_SE, CD_IN_CDCL2)

    # Cadmium oleate, 20 mL of 0.2 mol/L: 4 mmol CdO = 4 × 128.413 mg = 513.652 mg.
    oleate_cd, _ = cdo.draw(513_652)
    assert abs(oleate_cd - whole_ug(4 * CD * 1000)) <= 1  # 449 656 µg from 4 mmol, within the share's rounding
    oleate = r.call("POST", "/mixtures", {
        "label": "Cd-OL", "name": "cadmium oleate 0.2 M in 1-octadecene", "lab_id": ctx["lab"],
        "location_id": ctx["shelf"], "volume": "20 mL", "components": [
            {"substance_id": ctx["admin"].substance_id("cadmium oxide"), "molarity": "0.2 mol/L",
             "source_stock_id": s["CdO"]["id"], "amount": "513.652 mg"},
            {"substance_id": ctx["admin"].substance_id("oleic acid"), "volume_fraction": 0.1,
             "source_stock_id": s["OA"]["id"], "amount": "2 mL"},
            {"substance_id": ctx["admin"].substance_id("1-octadecene"), "volume_fraction": 0.85,
             "source_stock_id": s["ODE"]["id"], "amount": "17 mL"}]}, 201)
    assert ug(oleate, "Cd") == oleate_cd
    # TOP-Se, 10 mL of 1.0 mol/L: 10 mmol Se = 789.71 mg.
    top_se_se = se_stock.draw(789_710)[1]
    assert top_se_se == 789_710
    top_se = r.call("POST", "/mixtures", {
        "label": "TOP-Se", "name": "Se 1.0 M in trioctylphosphine", "lab_id": ctx["lab"],
        "location_id": ctx["shelf"], "volume": "10 mL", "components": [
            {"substance_id": ctx["admin"].substance_id("selenium"), "molarity": "1.0 mol/L",
             "source_stock_id": s["Se"]["id"], "amount": "789.71 mg"},
            {"substance_id": ctx["admin"].substance_id("trioctylphosphine"), "volume_fraction": 0.9,
             "source_stock_id": s["TOP"]["id"], "amount": "9 mL"}]}, 201)
    assert ug(top_se, "Se") == top_se_se
    mix_cd, mix_se = Holder(20_000, cd=oleate_cd), Holder(10_000, se=top_se_se)

    core = _approve(ctx, "CdSe cores", [{"mixture_id": oleate["id"], "amount": "2.0 mL"},
                                        {"mixture_id": top_se["id"], "amount": "0.5 mL"},
                                        {"stock_id": s["ODE"]["id"], "amount": "10 mL"}])
    drawn = {"Cd": 0, "Se": 0}
    outputs = {"Cd": 0, "Se": 0}
    waste = {"Cd": 0, "Se": 0}
    losses = {"Cd": 0, "Se": 0}
    unaccounted = {"Cd": 0, "Se": 0}
    runs = []
    for n in range(3):
        cd_in, _ = mix_cd.draw(2_000)
        _, se_in = mix_se.draw(500)
        run = r.call("POST", "/runs", {"procedure_id": core}, 201)
        assert (sum(ug(d, "Cd") for d in run["draws"]), sum(ug(d, "Se") for d in run["draws"])) == (cd_in, se_in)
        drawn["Cd"] += cd_in
        drawn["Se"] += se_in
        # Product by assay: 2500 mg/L Cd and 1500 mg/L Se in 4.0 mL = 10 000 µg and 6 000 µg.
        r.call("POST", f"/runs/{run['id']}/outputs", {"label": f"CdSe cores {n + 1}", "method": "measured", "assays": [
            {"element": "Cd", "concentration": "2500 mg/L", "volume": "4.0 mL"},
            {"element": "Se", "concentration": "1500 mg/L", "volume": "4.0 mL"}]}, 201)
        left = {"Cd": cd_in - 10_000, "Se": se_in - 6_000}
        if n == 0:  # by mass, then the gloves take all that is left
            _entry(ctx, "liquid", run["id"], "supernatants", [{"element": "Cd", "mass": "30 mg"},
                                                              {"element": "Se", "mass": "25 mg"}], volume="40 mL")
            left = {"Cd": left["Cd"] - 30_000, "Se": left["Se"] - 25_000}
            gloves = _entry(ctx, "solid", run["id"], "gloves and wipes", [{"element": "Cd", "share_percent": 100},
                                                                           {"element": "Se", "share_percent": 100}],
                            mass="20 g")
            assert (ug(gloves, "Cd"), ug(gloves, "Se")) == (left["Cd"], left["Se"])
            waste = {e: waste[e] + {"Cd": 30_000, "Se": 25_000}[e] + left[e] for e in waste}
        elif n == 1:  # by assay: 1300 mg/L Cd and Se in 25 mL = 32 500 µg each; the rest stays unaccounted
            _entry(ctx, "liquid", run["id"], "supernatants", [
                {"element": "Cd", "concentration": "1300 mg/L", "volume": "25 mL"},
                {"element": "Se", "concentration": "1300 mg/L", "volume": "25 mL"}], volume="25 mL")
            waste = {"Cd": waste["Cd"] + 32_500, "Se": waste["Se"] + 32_500}
            unaccounted = {e: unaccounted[e] + left[e] - 32_500 for e in unaccounted}
        else:  # a declared loss, then 95 % of what is left
            r.call("POST", f"/runs/{run['id']}/losses", {"description": "film left on the flask wall", "elements": [
                {"element": "Cd", "mass": "100 ug"}, {"element": "Se", "mass": "50 ug"}]}, 201)
            losses = {"Cd": 100, "Se": 50}
            left = {"Cd": left["Cd"] - 100, "Se": left["Se"] - 50}
            part = {e: whole_ug(Decimal(left[e]) * Decimal("0.95")) for e in left}
            entry = _entry(ctx, "liquid", run["id"], "supernatants", [{"element": "Cd", "share_percent": 95},
                                                                      {"element": "Se", "share_percent": 95}],
                           volume="40 mL")
            assert (ug(entry, "Cd"), ug(entry, "Se")) == (part["Cd"], part["Se"])
            waste = {e: waste[e] + part[e] for e in waste}
            unaccounted = {e: unaccounted[e] + left[e] - part[e] for e in waste}
        outputs = {"Cd": outputs["Cd"] + 10_000, "Se": outputs["Se"] + 6_000}
        runs.append(run)

    # The first run's product into the inventory: 4.0 mL holding 10 000 µg Cd and 6 000 µg Se.
    first = r.call("GET", f"/runs/{runs[0]['id']}")
    cores = r.call("POST", f"/runs/{runs[0]['id']}/outputs/{first['outputs'][0]['id']}/stock",
                   {"label": "P-CORE", "location_id": ctx["shelf"], "amount": "4.0 mL",
                    "substance_id": ctx["admin"].substance_id("cadmium selenide")}, 201)
    kept = {"Cd": 10_000, "Se": 6_000}
    product = Holder(4_000, cd=10_000, se=6_000)
    assert (ug(cores, "Cd"), ug(cores, "Se")) == (kept["Cd"], kept["Se"])

    # A ZnS shell on half of the cores; all of the shell run's remainder into the liquid container.
    shell = _approve(ctx, "ZnS shell", [{"stock_id": cores["id"], "amount": "2.0 mL"},
                                        {"stock_id": s["Zn"]["id"], "amount": "200 mg"},
                                        {"stock_id": s["S"]["id"], "amount": "20 mg"},
                                        {"stock_id": s["ODE"]["id"], "amount": "5 mL"}])
    cd_in, se_in = product.draw(2_000)
    assert (cd_in, se_in) == (5_000, 3_000)
    run = r.call("POST", "/runs", {"procedure_id": shell}, 201)
    r.call("POST", f"/runs/{run['id']}/outputs", {"label": "CdSe/ZnS", "method": "measured", "assays": [
        {"element": "Cd", "concentration": "1200 mg/L", "volume": "4.0 mL"},
        {"element": "Se", "concentration": "700 mg/L", "volume": "4.0 mL"}]}, 201)  # 4 800 µg, 2 800 µg
    _entry(ctx, "liquid", run["id"], "shell supernatants", [{"element": "Cd", "share_percent": 100},
                                                            {"element": "Se", "share_percent": 100}], volume="30 mL")
    drawn = {"Cd": drawn["Cd"] + 5_000, "Se": drawn["Se"] + 3_000}
    outputs = {"Cd": outputs["Cd"] + 4_800, "Se": outputs["Se"] + 2_800}
    waste = {"Cd": waste["Cd"] + 200, "Se": waste["Se"] + 200}

    # The expired CdCl2 disposed of into the solids container; the rest of the cores shipped out.
    disposed = ctx["manager"].call("POST", f"/stocks/{s['CdCl2']['id']}/dispose", {
        "container_id": ctx["solid"], "description": "expired CdCl2, past its date"}, 201)
    assert ug(disposed, "Cd") == CD_IN_CDCL2
    waste["Cd"] += CD_IN_CDCL2
    shipped = ctx["manager"].call("POST", f"/stocks/{cores['id']}/ship", {
        "destination": "Partner university, spectroscopy group"}, 201)
    assert (ug(shipped, "Cd"), ug(shipped, "Se")) == (product.cd, product.se) == (5_000, 3_000)

    received = {"Cd": CD_IN_CDO + CD_IN_CDCL2, "Se": SE_IN_SE}
    closing = {"Cd": cdo.cd + mix_cd.cd, "Se": se_stock.se + mix_se.se}  # what the stocks and mixtures hold now
    return {e: {"opening": 0, "received": received[e], "into_products": outputs[e] - kept[e],
                "into_waste": waste[e], "shipped_out": {"Cd": 5_000, "Se": 3_000}[e], "declared_losses": losses[e],
                "corrections": 0, "closing": closing[e], "unaccounted": unaccounted[e], "drawn": drawn[e]}
            for e in ("Cd", "Se")}


def test_the_worked_month_closes_to_the_microgram(month):
    expected = _work_the_month(month)
    officer = month["officer"]
    ledger = officer.call("GET", "/reports/elements")
    assert "site safety officer" in ledger["caution"]
    for element in ("Cd", "Se"):
        [line] = [row for row in ledger["rows"] if row["element"] == element]
        want = expected[element]
        got = {figure: line[f"{figure}_ug"] for figure in FIGURES}
        assert got == {figure: want[figure] for figure in FIGURES}, element
        assert line["drawn_ug"] == want["drawn"]
        # The equation, on the figures as reported.
        assert (got["opening"] + got["received"] == got["into_products"] + got["into_waste"] + got["shipped_out"]
                + got["declared_losses"] + got["corrections"] + got["closing"] + got["unaccounted"])
        # Within the site tolerance (5 %, DESIGN.md "Numbers") of what the runs drew.
        assert 0 < got["unaccounted"] <= Decimal("0.05") * line["drawn_ug"]
        assert line["difference_ug"] == 0 and line["closes"] is True
        # The closing figure is what the inventory report finds in the stock and mixture rows now.
        on_hand = {row["element"]: row["mass_ug"] for row in officer.call("GET", "/reports/inventory?by=element")["rows"]}
        assert line["closing_ug"] == on_hand[element]
        # Every figure is the sum of the records behind it.
        for figure in FIGURES:
            parts = officer.call("GET", f"/reports/elements/contributions?element={element}&month={line['month']}"
                                        f"&figure={figure}")
            assert parts["mass_ug"] == sum(p["mass_ug"] for p in parts["contributions"]) == got[figure], figure
    # The shell run's zinc and sulfur went nowhere on record: their month does not close, and says so.
    zinc = next(row for row in ledger["rows"] if row["element"] == "Zn")
    assert zinc["unaccounted_ug"] == zinc["drawn_ug"] > 0 and zinc["closes"] is False
    assert ledger["closes"] is False


def test_drill_down_names_the_records(month):
    _work_the_month(month)
    officer = month["officer"]
    this = officer.call("GET", "/reports/elements?element=Cd")["rows"][-1]["month"]

    def records(figure):
        return officer.call("GET", f"/reports/elements/contributions?element=Cd&month={this}&figure={figure}")

    received = records("received")["contributions"]
    assert sorted(p["label"] for p in received) == ["received: stock CdCl2-OLD", "received: stock CdO"]
    shipped = records("shipped_out")["contributions"]
    assert [p["record"] for p in shipped] == ["stock_movement"] and "Partner university" in shipped[0]["label"]
    products = records("into_products")["contributions"]
    assert sorted(p["mass_ug"] for p in products) == [-10_000, 4_800, 10_000, 10_000, 10_000]
    waste = records("into_waste")["contributions"]
    assert {p["record"] for p in waste} == {"waste_entry"} and len(waste) == 6
    closing = {p["label"]: p["mass_ug"] for p in records("closing")["contributions"]}
    assert set(closing) == {"stock CdO", "mixture Cd-OL"}


def test_the_ledger_as_csv_xlsx_and_on_the_command_line(month, app, monkeypatch):
    import io

    import pandas as pd
    from click.testing import CliRunner

    from service.cli import main

    expected = _work_the_month(month)
    response = month["officer"].client.get("/api/v1/reports/elements?element=Cd&format=csv",
                                           headers={"Authorization": f"Bearer {month['officer'].token}"})
    assert response.status_code == 200 and response.mimetype == "text/csv"
    frame = pd.read_csv(io.BytesIO(response.data), skiprows=1)
    assert int(frame.iloc[-1]["closing_ug"]) == expected["Cd"]["closing"]
    response = month["officer"].client.get("/api/v1/reports/elements?format=xlsx",
                                           headers={"Authorization": f"Bearer {month['officer'].token}"})
    sheet = pd.read_excel(io.BytesIO(response.data), sheet_name="elements")
    assert int(sheet[sheet["element"] == "Se"].iloc[-1]["into_waste_ug"]) == expected["Se"]["into_waste"]
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", app.config["DATABASE_URL"])
    result = CliRunner().invoke(main, ["report", "elements", "--element", "Cd"], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    assert f"{expected['Cd']['closing'] / 1000:,.3f}" in result.output and "yes" in result.output


def test_refusals_change_neither_stocks_nor_ledger(month):
    expected = _work_the_month(month)
    officer, r = month["officer"], month["researcher"]

    def state():
        return (officer.call("GET", "/reports/elements"), officer.call("GET", "/stocks?include_retired=true&limit=500"),
                officer.call("GET", "/mixtures?include_retired=true&limit=500"))

    before = state()
    assert before[0]["rows"] and expected
    cdo = month["stocks"]["CdO"]["id"]
    # A draw beyond what the stock holds; a waste entry beyond what a run has left; a shipment of more than held.
    proc = r.call("GET", "/procedures?limit=10")["items"][0]["id"]
    r.call("POST", "/runs", {"procedure_id": proc, "draws": [{"stock_id": cdo, "amount": "50 g"}]}, 409)
    first_run = r.call("GET", "/runs?limit=1")["items"][0]["id"]
    r.call("POST", f"/waste_containers/{month['liquid']}/entries", {
        "run_id": first_run, "description": "too much", "volume": "5 mL",
        "elements": [{"element": "Cd", "mass": "500 mg"}]}, 422)
    month["manager"].call("POST", f"/stocks/{cdo}/ship", {"destination": "anywhere", "amount": "50 g"}, 422)
    assert state() == before


def test_months_chain_one_closing_to_the_next_opening(month, app):
    import datetime as dt

    from sqlalchemy import update

    from service.store.db import session_scope
    from service.store.models import HoldingChange, Run, RunLoss, RunOutput, StockMovement, WasteEntry

    expected = _work_the_month(month)
    # Put the worked month into January 2026 (every record of it), then receive 1.000 g more Se now.
    january = dt.datetime(2026, 1, 15, 12, 0, tzinfo=dt.timezone.utc)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        for column in (HoldingChange.at, WasteEntry.at, RunOutput.at, RunLoss.at, Run.started_at, StockMovement.at):
            session.execute(update(column.class_).values({column.key: january}))
    month["admin"].call("POST", "/stocks", {"label": "Se-2", "substance_id": month["admin"].substance_id("selenium"),
                                            "lab_id": month["lab"], "location_id": month["shelf"],
                                            "amount": "1.000 g"}, 201)
    rows = month["officer"].call("GET", "/reports/elements?element=Se&since=2026-01")["rows"]
    assert rows[0]["month"] == "2026-01" and rows[1]["month"] == "2026-02"
    assert rows[0]["closing_ug"] == expected["Se"]["closing"] and rows[0]["closes"] is True
    for earlier, later in zip(rows, rows[1:]):
        assert later["opening_ug"] == earlier["closing_ug"]
    quiet = rows[1:-1]  # the months between hold no record: nothing moves, and they close
    assert all(r["received_ug"] == r["into_waste_ug"] == r["unaccounted_ug"] == 0 and r["closes"] for r in quiet)
    assert rows[-1]["received_ug"] == 1_000_000
    assert rows[-1]["closing_ug"] == expected["Se"]["closing"] + 1_000_000
    # A range after the records begin opens with what was on hand then.
    later = month["officer"].call("GET", "/reports/elements?element=Se&since=2026-03")["rows"]
    assert later[0]["opening_ug"] == expected["Se"]["closing"]
    error = month["officer"].call("GET", "/reports/elements?since=2026-13", expect=422)["error"]
    assert "since" in str(error["details"])
    error = month["officer"].call("GET", "/reports/elements?since=0326-08", expect=422)["error"]
    assert "at most 600 months" in error["message"] and "since" in str(error["details"])
