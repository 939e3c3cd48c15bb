"""Ledger reports (service/store/ledger.py, service/api/reports.py, `dotledger report|export`).

Every expected total below is added by hand from the entries in ``_seed_waste`` (no outside
values); the inventory totals are the sums of the element rows the stocks API returned.
"""

from __future__ import annotations

import datetime as dt
import io

import pandas as pd
import pytest
from click.testing import CliRunner

from service.cli import main
from service.store import ledger
from service.store.db import session_scope
from service.store.models import Lab, Location, WasteContainer, WasteEntry, WasteEntryElement
from tests.conftest import Api, make_user

NON_HALOGENATED, AQUEOUS = "non_halogenated_solvent_heavy_metals", "aqueous_heavy_metals"
XLSX = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


def _at(text: str) -> dt.datetime:
    return dt.datetime.fromisoformat(text).replace(tzinfo=dt.timezone.utc)


def _seed_waste(app) -> dict[str, int]:
    """Two labs, three containers, two months, two streams and one reversal."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test:ledger"}
        labs = {code: Lab(code=code, name=f"Lab {code}") for code in ("A-1", "B-2")}
        session.add_all(labs.values())
        session.flush()
        places = {code: Location(lab_id=lab.id, building=code[0], room=code, storage="SAA",
                                 kind="satellite_accumulation_area")
                  for code, lab in labs.items()}
        session.add_all(places.values())
        session.flush()
        boxes = {}
        for label, code, stream in (("A-W1", "A-1", NON_HALOGENATED), ("A-W2", "A-1", AQUEOUS),
                                    ("B-W1", "B-2", NON_HALOGENATED)):
            boxes[label] = WasteContainer(label=label, lab_id=labs[code].id, location_id=places[code].id, stream=stream,
                                          form="liquid", capacity_text="20 L", capacity_micro=20_000_000)
        session.add_all(boxes.values())
        session.flush()

        def entry(box: str, at: str, reverses: WasteEntry | None = None, **masses_ug: int) -> WasteEntry:
            sign = -1 if reverses is not None else 1
            record = WasteEntry(container_id=boxes[box].id, description=f"{box} {at}", volume_ul=sign * 50_000,
                                at=_at(at),
                                reverses_entry_id=reverses.id if reverses is not None else None,
                                elements=[WasteEntryElement(element=s, mass_ug=ug) for s, ug in masses_ug.items()])
            session.add(record)
            session.flush()
            return record

        entry("A-W1", "2026-01-10T09:00", Cd=1200, Se=800)
        wrong = entry("A-W1", "2026-01-25T15:30", Cd=300)
        entry("A-W2", "2026-02-03T11:00", Cd=50, Pb=7000)
        entry("A-W1", "2026-02-14T08:00", reverses=wrong, Cd=-300)
        entry("A-W1", "2026-02-20T16:45", Cd=450)
        entry("B-W1", "2026-01-31T23:59:59", Cd=10_000)  # last second of January (UTC)
        entry("B-W1", "2026-02-01T00:00:00", Cd=5)  # first second of February
        return {code: lab.id for code, lab in labs.items()}


def _frame(app, by, **filters) -> pd.DataFrame:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return ledger.waste_by(session, by, **filters)


def _rows(frame: pd.DataFrame) -> list[tuple]:
    return [tuple(row) for row in frame.drop(columns="mass_mg").itertuples(index=False)]


def test_waste_by_element_stream_month(app):
    _seed_waste(app)
    frame = _frame(app, ["element", "stream", "month"])
    assert list(frame.columns) == ["element", "stream", "month", "mass_ug", "mass_mg"]
    assert str(frame["mass_ug"].dtype) == "int64"
    assert _rows(frame) == [  # hand-added from _seed_waste
        ("Cd", AQUEOUS, "2026-02", 50),
        ("Cd", NON_HALOGENATED, "2026-01", 1200 + 300 + 10_000),
        ("Cd", NON_HALOGENATED, "2026-02", -300 + 450 + 5),
        ("Pb", AQUEOUS, "2026-02", 7000),
        ("Se", NON_HALOGENATED, "2026-01", 800),
    ]
    assert frame["mass_mg"].tolist() == pytest.approx([0.05, 11.5, 0.155, 7.0, 0.8])


@pytest.mark.parametrize("by, filters, expected", [
    (["element"], {}, [("Cd", 11_705), ("Pb", 7000), ("Se", 800)]),
    (["lab", "element"], {"element": "Cd"}, [("A-1", "Cd", 1700), ("B-2", "Cd", 10_005)]),
    (["container"], {"element": "Cd"}, [("A-W1", 1650), ("A-W2", 50), ("B-W1", 10_005)]),
    (["element"], {"since": dt.date(2026, 2, 1), "until": dt.date(2026, 2, 28)}, [("Cd", 205), ("Pb", 7000)]),
    (["month"], {"until": dt.date(2026, 1, 31), "element": "Cd"}, [("2026-01", 11_500)]),  # until is inclusive
    (["element"], {"lab_ids": set()}, []),
])
def test_waste_by_groupings_and_filters(app, by, filters, expected):
    _seed_waste(app)
    assert _rows(_frame(app, by, **filters)) == expected


def test_no_keys_means_the_default_grouping(app):
    _seed_waste(app)
    frame = _frame(app, [])
    assert list(frame.columns) == ["element", "stream", "month", "mass_ug", "mass_mg"]
    assert int(frame["mass_ug"].sum()) == 11_705 + 7000 + 800


def test_unknown_group_key_names_the_allowed_keys(app):
    with pytest.raises(ledger.UnknownGroupKey) as info:
        _frame(app, ["element", "colour"])
    assert isinstance(info.value, ValueError) and info.value.key == "colour"
    assert str(info.value) == ("the waste report cannot group by 'colour'; "
                               "choose from element, stream, lab, container, month")


def test_api_json_csv_xlsx_agree(app, api):
    _seed_waste(app)
    query = "/reports/waste?by=element,stream,month"
    body = api.call("GET", query)
    assert body["columns"] == ["element", "stream", "month", "mass_ug", "mass_mg"]
    assert body["units"] == {"mass_ug": "µg", "mass_mg": "mg"}
    assert "local regulations" in body["caution"] and "site safety officer" in body["caution"]
    json_totals = {row["element"]: 0 for row in body["rows"]}
    for row in body["rows"]:
        json_totals[row["element"]] += row["mass_ug"]
    assert json_totals == {"Cd": 11_705, "Pb": 7000, "Se": 800}  # hand-added

    headers = {"Authorization": f"Bearer {api.token}"}
    csv = api.client.get(f"/api/v1{query}&format=csv", headers=headers)
    assert csv.status_code == 200 and csv.mimetype == "text/csv"
    assert csv.headers["Content-Disposition"].startswith('attachment; filename="dotledger-waste-')
    assert csv.get_data(as_text=True).startswith("# These figures are records for the site's own use")
    from_csv = pd.read_csv(io.BytesIO(csv.data), skiprows=1)
    assert from_csv.groupby("element")["mass_ug"].sum().to_dict() == json_totals

    xlsx = api.client.get(f"/api/v1{query}&format=xlsx", headers=headers)
    assert xlsx.status_code == 200 and xlsx.mimetype == XLSX
    assert xlsx.headers["Content-Disposition"].endswith('.xlsx"')
    from_xlsx = pd.read_excel(io.BytesIO(xlsx.data), sheet_name="waste")
    pd.testing.assert_frame_equal(from_xlsx, from_csv)
    assert ledger.CAUTION in pd.read_excel(io.BytesIO(xlsx.data), sheet_name="about")["about"].tolist()


@pytest.mark.parametrize("query, field", [
    ("/reports/waste?by=element,colour", "by"),
    ("/reports/waste?by=building", "by"),  # an inventory key, not a waste key
    ("/reports/inventory?by=month", "by"),
    ("/reports/waste?element=Xx", "element"),
    ("/reports/waste?since=2026-13-01", "since"),
    ("/reports/waste?format=pdf", "format"),
    ("/reports/waste?colour=red", "colour"),
])
def test_bad_query_is_422(api, query, field):
    error = api.call("GET", query, expect=422)["error"]
    assert error["code"] == "invalid_input"
    assert [d["field"] for d in error["details"]] == [field]


def test_since_after_until_is_422(api):
    error = api.call("GET", "/reports/waste?since=2026-03-01&until=2026-02-01", expect=422)["error"]
    assert "is after until" in error["details"][0]["message"]


def test_researcher_sees_only_their_labs(app, client):
    labs = _seed_waste(app)
    researcher = Api(client, make_user(app, "r@test.example", "researcher", lab_ids=[labs["A-1"]]))
    auditor = Api(client, make_user(app, "au@test.example", "auditor"))
    mine = researcher.call("GET", "/reports/waste?by=lab,element")["rows"]
    assert {(r["lab"], r["element"], r["mass_ug"]) for r in mine} == {("A-1", "Cd", 1700), ("A-1", "Pb", 7000),
                                                                         ("A-1", "Se", 800)}
    everyone = auditor.call("GET", "/reports/waste?by=lab&element=Cd")["rows"]
    assert [(r["lab"], r["mass_ug"]) for r in everyone] == [("A-1", 1700), ("B-2", 10_005)]


def _stock(api: Api, label: str, substance: str, lab_id: int, location_id: int, amount: str) -> dict:
    return api.call("POST", "/stocks", {"label": label, "substance_id": api.substance_id(substance), "lab_id": lab_id,
                                        "location_id": location_id, "amount": amount}, 201)


def test_inventory_matches_the_stocks_element_rows(api, client, app):
    lab_id, shelf = api.lab_and_location()
    fridge = api.call("POST", "/locations", {"lab_id": lab_id, "building": "B", "room": "B-101",
                                             "storage": "fridge"}, 201)["id"]
    other = api.call("POST", "/labs", {"code": "C-3", "name": "Other group"}, 201)["id"]
    other_shelf = api.call("POST", "/locations", {"lab_id": other, "building": "C", "room": "C-3",
                                                  "storage": "shelf"}, 201)["id"]
    stocks = [_stock(api, "S-1", "cadmium oxide", lab_id, shelf, "25 g"),
              _stock(api, "S-2", "cadmium oxide", lab_id, fridge, "1 g"),
              _stock(api, "S-3", "selenium", lab_id, shelf, "10 g"),
              _stock(api, "S-4", "cadmium oxide", other, other_shelf, "2 g")]
    gone = _stock(api, "S-5", "cadmium oxide", lab_id, shelf, "5 g")
    api.call("POST", f"/stocks/{gone['id']}/retire")
    storage = {shelf: ("B", "B-101", "cabinet 1"), fridge: ("B", "B-101", "fridge"), other_shelf: ("C", "C-3", "shelf")}
    expected: dict[tuple, int] = {}
    for stock in stocks:
        for row in stock["elements"]:
            key = (row["element"], *storage[stock["location_id"]])
            expected[key] = expected.get(key, 0) + row["mass_ug"]

    body = api.call("GET", "/reports/inventory")
    assert body["columns"] == ["element", "building", "room", "storage", "mass_ug", "mass_mg"]
    got = {(r["element"], r["building"], r["room"], r["storage"]): r["mass_ug"] for r in body["rows"]}
    assert got == expected
    # By hand (CIAAW 2021, Cd 112.414, O 15.999): CdO is 112.414 / 128.413 Cd; 25 g on the shelf (the
    # retired 5 g left out) = 21 885 245 µg, 1 g in the fridge = 875 410 µg, 2 g in the other lab = 1 750 820 µg.
    assert got[("Cd", "B", "B-101", "cabinet 1")] == 21_885_245
    assert got[("Cd", "B", "B-101", "fridge")] == 875_410
    assert got[("Cd", "C", "C-3", "shelf")] == 1_750_820
    assert "site safety officer" in body["caution"]

    researcher = Api(client, make_user(app, "r@test.example", "researcher", lab_ids=[other]))
    scoped = researcher.call("GET", "/reports/inventory?by=lab,element")["rows"]
    assert [(r["lab"], r["element"], r["mass_ug"]) for r in scoped] == [
        ("C-3", e["element"], e["mass_ug"]) for e in stocks[3]["elements"]]


def test_cli_report_and_export(app, database_url, monkeypatch, tmp_path):
    _seed_waste(app)
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", database_url)
    runner = CliRunner()
    shown = runner.invoke(main, ["report", "waste", "--by", "element,month", "--since", "2026-02-01"])
    assert shown.exit_code == 0, shown.output
    assert "mass_mg" in shown.output and "mass_ug" not in shown.output
    assert "Cd 2026-02 0.205" in " ".join(shown.output.split())  # 5 - 300 + 450 + 50 µg, hand-added
    assert "site safety officer" in shown.output
    bad = runner.invoke(main, ["report", "waste", "--by", "colour"])
    assert bad.exit_code == 2 and "cannot group by 'colour'" in bad.output

    for fmt in ("csv", "xlsx"):
        out = tmp_path / f"waste.{fmt}"
        done = runner.invoke(main, ["export", "waste", "--format", fmt, "--output", str(out)])
        assert done.exit_code == 0, done.output
        assert "wrote 5 row(s) of the waste report" in done.output
        frame = pd.read_csv(out, skiprows=1) if fmt == "csv" else pd.read_excel(out, sheet_name="waste")
        assert frame.groupby("element")["mass_ug"].sum().to_dict() == {"Cd": 11_705, "Pb": 7000, "Se": 800}
    shown = runner.invoke(main, ["report", "inventory"])
    assert shown.exit_code == 0 and "no records match" in shown.output
