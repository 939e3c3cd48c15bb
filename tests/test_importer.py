"""Spreadsheet import: valid rows in one transaction, every bad row reported."""

from __future__ import annotations

import pandas as pd
import pytest
from click.testing import CliRunner
from sqlalchemy import func, select

from service.cli import main
from service.errors import InvalidInput
from service.store.db import session_scope
from service.store.importer import import_inventory, read_table
from service.store.models import Lab, Stock, StockElement
from tests.conftest import make_app

GOOD = [
    # substance cell, amount, purity
    ("cadmium oxide", "25 g", "99.99"),
    ("CdO", "5 g", ""),
    ("1306-19-0", "1 g", "99.5"),
    ("selenium", "50 g", "99.99"),
    ("TOP", "100 mL", "97"),
    ("1-octadecene", "1 L", "90"),
    ("acetone", "4 L", "99.5"),
    ("lead(II) bromide", "10 g", "99.999"),
]
# Each bad row with the words its rejection must contain.
BAD = [
    ({"substance": "unobtainium"}, "unknown substance"),
    ({"cas": "1306-19-1"}, "check digit"),
    ({"amount": "25"}, "needs a unit"),
    ({"amount": "twenty grams"}, "not an amount"),
    ({"amount": "1,5 g"}, "decimal point"),
    ({"lab": "Z-999"}, "unknown lab"),
    ({"purity_percent": "140"}, "purity_percent"),
    ({"label": ""}, "label"),
    ({"cas": "7782-49-2"}, "is not the CAS number"),  # selenium's CAS on a CdO row
    ({"expires_on": "next week"}, "expires_on"),
]


def _frame(rows: int, bad_every: int | None) -> tuple[pd.DataFrame, list[tuple[int, str]]]:
    records, expected_bad = [], []
    for i in range(rows):
        substance, amount, purity = GOOD[i % len(GOOD)]
        row = {"label": f"IMP-{i:05d}", "substance": substance, "cas": "", "amount": amount, "purity_percent": purity,
               "lab": "C-214", "building": "C", "room": "C-214", "storage": f"cabinet {i % 3}",
               "opened_on": "2026-01-15", "expires_on": ""}
        if bad_every and i % bad_every == bad_every // 2:
            change, words = BAD[len(expected_bad) % len(BAD)]
            row = {**row, "substance": "cadmium oxide", **change}
            expected_bad.append((i + 2, words))
        records.append(row)
    return pd.DataFrame(records), expected_bad


@pytest.fixture
def app_with_lab(sqlite_url, rules_dir):
    app = make_app(sqlite_url, rules_dir)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.add(Lab(code="C-214", name="Test group", building="C"))
    yield app
    app.extensions["dotledger.engine"].dispose()


def _lookup(catalogue):
    return lambda text: (catalogue.find(text).key if catalogue.find(text) else None)


def _count(app, model=Stock) -> int:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return session.scalar(select(func.count()).select_from(model))


def test_five_thousand_rows_with_fifty_bad(app_with_lab, catalogue, tmp_path):
    frame, expected_bad = _frame(5000, bad_every=100)
    assert len(expected_bad) == 50
    path = tmp_path / "inventory.csv"
    frame.to_csv(path, index=False)
    ticks = []
    with session_scope(app_with_lab.extensions["dotledger.sessions"]) as session:
        report = import_inventory(session, read_table(path), catalogue_lookup=_lookup(catalogue), only_valid=True,
                                  progress=ticks.append)
    assert report.imported == 4950
    assert len(report.rejected) == 50
    assert sum(ticks) == 5000
    assert [r.line for r in report.rejected] == [line for line, _ in expected_bad]
    for rejected, (_, words) in zip(report.rejected, expected_bad):
        assert words in rejected.reason, (rejected, words)
    assert _count(app_with_lab) == 4950
    assert report.locations_created == 3


def test_xlsx_import_through_the_cli(app_with_lab, tmp_path, monkeypatch):
    frame, expected_bad = _frame(40, bad_every=10)
    path = tmp_path / "inventory.xlsx"
    frame.to_excel(path, index=False)
    report_path = tmp_path / "rejected.csv"
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", app_with_lab.config["DATABASE_URL"])
    result = CliRunner().invoke(main, ["import-inventory", str(path), "--only-valid", "--report", str(report_path)])
    assert result.exit_code == 0, result.output
    assert "40 row(s) read: imported 36, rejected 4" in result.output
    assert pd.read_csv(report_path)["line"].tolist() == [line for line, _ in expected_bad]
    assert _count(app_with_lab) == 36


def test_a_file_with_a_rejected_row_imports_nothing_unless_the_accepted_rows_are_asked_for(
        app_with_lab, catalogue, tmp_path, monkeypatch):
    frame, expected_bad = _frame(10, bad_every=5)
    assert len(expected_bad) == 2
    with session_scope(app_with_lab.extensions["dotledger.sessions"]) as session:
        report = import_inventory(session, frame, catalogue_lookup=_lookup(catalogue))
    assert report.withheld and report.imported == 0 and report.accepted == 8
    assert [(r.line, r.accepted) for r in report.lines if not r.accepted] == [(line, False) for line, _ in expected_bad]
    assert _count(app_with_lab) == 0
    path = tmp_path / "inventory.csv"
    frame.to_csv(path, index=False)
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", app_with_lab.config["DATABASE_URL"])
    result = CliRunner().invoke(main, ["import-inventory", str(path)])
    assert result.exit_code == 1 and "nothing imported: 2 row(s) rejected" in result.output
    assert _count(app_with_lab) == 0
    result = CliRunner().invoke(main, ["import-inventory", str(path), "--only-valid"])
    assert result.exit_code == 0 and "imported 8, rejected 2" in result.output
    assert _count(app_with_lab) == 8


def test_dry_run_writes_nothing(app_with_lab, catalogue):
    frame, _ = _frame(20, bad_every=None)
    with session_scope(app_with_lab.extensions["dotledger.sessions"]) as session:
        report = import_inventory(session, frame, catalogue_lookup=_lookup(catalogue), dry_run=True)
    assert report.imported == 20 and _count(app_with_lab) == 0


def test_failure_during_write_leaves_nothing_half_imported(app_with_lab, catalogue, monkeypatch):
    frame, _ = _frame(30, bad_every=None)
    from service.store import inventory

    real = inventory.create_stock
    calls = []

    def failing(session, body):
        calls.append(body.label)
        if len(calls) == 20:
            raise RuntimeError("disk full")
        return real(session, body)

    monkeypatch.setattr(inventory, "create_stock", failing)
    with pytest.raises(RuntimeError):
        with session_scope(app_with_lab.extensions["dotledger.sessions"]) as session:
            import_inventory(session, frame, catalogue_lookup=_lookup(catalogue))
    assert _count(app_with_lab) == 0 and _count(app_with_lab, StockElement) == 0


def test_duplicate_labels_in_the_file_reject_the_second(app_with_lab, catalogue):
    frame, _ = _frame(3, bad_every=None)
    frame.loc[2, "label"] = frame.loc[0, "label"]
    with session_scope(app_with_lab.extensions["dotledger.sessions"]) as session:
        report = import_inventory(session, frame, catalogue_lookup=_lookup(catalogue), only_valid=True)
    assert report.imported == 2 and report.rejected[0].line == 4 and "already used" in report.rejected[0].reason


def test_missing_columns_and_wrong_file_type(tmp_path):
    path = tmp_path / "short.csv"
    pd.DataFrame([{"label": "x", "amount": "1 g"}]).to_csv(path, index=False)
    with pytest.raises(InvalidInput, match="missing column"):
        read_table(path)
    with pytest.raises(InvalidInput, match=r"\.csv or \.xlsx"):
        read_table(tmp_path / "inventory.ods")
