"""The shared vocabularies (service/vocab.py): the element symbols against two outside lists, one
element-symbol check at every edge, and the database CHECK constraints built from the vocabularies.

Sources: the IUPAC Periodic Table of the Elements (symbols and atomic numbers; Nh, Mc, Ts and Og as
named by IUPAC in 2016 — from memory), and the ``periodictable`` package as an independent list.
"""

from __future__ import annotations

import ast
import datetime as dt
import re
from pathlib import Path

import periodictable
import pytest
from alembic import command
from alembic.config import Config
from click.testing import CliRunner
from sqlalchemy import inspect, text
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from service import vocab
from service.balance import BalanceError, Flow
from service.cli import main
from service.config import load_config
from service.rules.measures import MeasureNameError, resolve_measure
from service.store.db import MIGRATIONS, make_engine, upgrade
from service.store.models import Lab, Location, Mixture, Procedure, Stock, Substance, User, WasteContainer, WasteEntry
from tests.conftest import Api, make_user

# Not element symbols: periodictable's neutron ("n"), no element at all, the wrong case, nothing.
BAD_SYMBOLS = ["n", "Xx", "cd", ""]


# --- the list of symbols ---------------------------------------------------------------------


def test_symbols_are_periodictables_elements_in_atomic_number_order():
    # periodictable numbers its table 0 (the neutron, "n") to 118; 0 is not an element.
    theirs = [(element.number, element.symbol) for element in periodictable.elements if element.number > 0]
    assert list(enumerate(vocab.ELEMENT_SYMBOLS, start=1)) == theirs


@pytest.mark.parametrize("number, symbol", [
    (1, "H"), (6, "C"), (16, "S"), (30, "Zn"), (34, "Se"), (48, "Cd"), (52, "Te"), (55, "Cs"),
    (80, "Hg"), (82, "Pb"), (113, "Nh"), (115, "Mc"), (117, "Ts"), (118, "Og"),
])  # IUPAC periodic table, from memory
def test_symbols_at_iupac_atomic_numbers(number, symbol):
    assert vocab.ELEMENT_SYMBOLS[number - 1] == symbol


@pytest.mark.parametrize("value", BAD_SYMBOLS + ["D", "T", "CD", "Cd ", "Uuo", None, 48])
def test_the_check_refuses(value):
    # D and T are hydrogen isotopes, Uuo the placeholder name element 118 had before 2016.
    with pytest.raises(vocab.UnknownElementError) as caught:
        vocab.element_symbol(value)
    assert isinstance(caught.value, ValueError) and caught.value.value == value


def test_the_check_accepts_every_symbol():
    assert [vocab.element_symbol(symbol) for symbol in vocab.ELEMENT_SYMBOLS] == list(vocab.ELEMENT_SYMBOLS)


def test_wrong_case_names_the_right_symbol():
    assert "write Cd" in str(vocab.UnknownElementError("cd"))


@pytest.mark.parametrize("text_in, message", [
    ("Cd,Xx", "'Xx' is not an element symbol"),
    ("Cd,cd", "'cd' is not an element symbol"),
    ("Cd,n", "'n' is not an element symbol"),
    (" , ", "at least one element"),
    ("Cd,Se,Cd", "Cd named twice"),
])
def test_element_lists_refuse(text_in, message):
    with pytest.raises(ValueError, match=re.escape(message)):
        vocab.element_list(text_in)


def test_tracked_elements_hold_the_balance_elements():
    assert set(vocab.BALANCE_ELEMENTS) <= set(vocab.TRACKED_ELEMENTS)
    # cadmium, selenium and lead: the core of a CdSe / PbSe group (RCRA D006, D010, D008)
    assert {"Cd", "Se", "Pb"} <= set(vocab.BALANCE_ELEMENTS)
    # and the chalcogens of cores, shells (ZnS, CdS) and their precursors: sulfur, selenium, tellurium
    assert {"S", "Se", "Te"} <= set(vocab.BALANCE_ELEMENTS)


def test_vocab_is_pure():
    tree = ast.parse(Path(vocab.__file__).read_text(encoding="utf-8"))
    imported = {alias.name for node in ast.walk(tree) if isinstance(node, ast.Import) for alias in node.names}
    imported |= {node.module for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)}
    assert imported == {"__future__"}


# --- the pure edges: balance, rule measures, configuration -----------------------------------


@pytest.mark.parametrize("symbol", BAD_SYMBOLS)
def test_the_balance_refuses(symbol):
    with pytest.raises(BalanceError, match="not an element symbol") as caught:
        Flow("CdO draw", "input", {symbol: 1000})
    assert isinstance(caught.value, ValueError)


@pytest.mark.parametrize("symbol", BAD_SYMBOLS)
def test_rule_measures_refuse(symbol):
    with pytest.raises(MeasureNameError):
        resolve_measure(f"element_mass:{symbol}")


@pytest.mark.parametrize("value", ["Cd,n", "Cd,Xx", "cd,Se", " , "])
def test_balance_elements_setting_refuses(monkeypatch, tmp_path, value):
    monkeypatch.setenv("DOTLEDGER_BALANCE_ELEMENTS", value)
    with pytest.raises(ValueError, match="DOTLEDGER_BALANCE_ELEMENTS"):
        load_config(str(tmp_path))


def test_balance_elements_setting(monkeypatch, tmp_path):
    monkeypatch.setenv("DOTLEDGER_BALANCE_ELEMENTS", "Cd, Se,Pb")
    assert load_config(str(tmp_path))["BALANCE_ELEMENTS"] == ("Cd", "Se", "Pb")
    monkeypatch.delenv("DOTLEDGER_BALANCE_ELEMENTS")
    assert load_config(str(tmp_path))["BALANCE_ELEMENTS"] == vocab.BALANCE_ELEMENTS


# --- the API edges -----------------------------------------------------------------------------


@pytest.fixture
def edges(app, client):
    """An open run and a waste container, as the researcher who may write to both."""
    admin = Api(client, make_user(app, "admin@test.example", "admin"))
    lab, place = admin.lab_and_location()
    stock = admin.call("POST", "/stocks", {"label": "CdO-1", "substance_id": admin.substance_id("cadmium oxide"),
                                           "lab_id": lab, "location_id": place, "amount": "1 g"}, 201)["id"]
    researcher = Api(client, make_user(app, "res@test.example", "researcher", lab_ids=[lab]))
    officer = Api(client, make_user(app, "so@test.example", "safety_officer"))
    proc = researcher.call("POST", "/procedures", {"lab_id": lab, "title": "CdO draw", "steps": [{"operation": "mix"}],
                                                  "draws": [{"stock_id": stock, "amount": "10 mg"}]}, 201)["id"]
    researcher.call("POST", f"/procedures/{proc}/submit")
    officer.call("POST", f"/procedures/{proc}/approve", {"comment": "edge test"})
    run = researcher.call("POST", "/runs", {"procedure_id": proc}, 201)["id"]
    container = admin.call("POST", "/waste_containers", {"label": "E-1", "lab_id": lab, "location_id": place,
                                                         "stream": "aqueous_heavy_metals", "capacity": "5 L"}, 201)["id"]
    return {"researcher": researcher, "run": run, "container": container}


def _bodies(symbol: str) -> list[tuple[str, str, dict, str]]:
    """(method, path, body, field named in the answer) for every place an element symbol arrives."""
    amount = [{"element": symbol, "mass": "1 mg"}]
    return [
        ("POST", "/waste_containers/{container}/entries", {"description": "rinse", "volume": "1 L", "elements": amount},
         "elements.0.element"),
        ("POST", "/runs/{run}/outputs", {"label": "dots", "method": "measured", "elements": amount}, "elements.0.element"),
        ("POST", "/runs/{run}/outputs", {"label": "dots", "method": "measured", "assays": [
            {"element": symbol, "concentration": "10 mg/L", "volume": "4 mL"}]}, "assays.0.element"),
        ("POST", "/runs/{run}/losses", {"description": "spilt on the bench", "elements": amount}, "elements.0.element"),
        ("GET", f"/stocks?element={symbol}", None, "element"),
        ("GET", f"/substances?element={symbol}", None, "element"),
        ("GET", f"/reports/waste?element={symbol}", None, "element"),
    ]


@pytest.mark.parametrize("symbol", BAD_SYMBOLS)
def test_every_api_edge_refuses(edges, symbol):
    for method, path, body, field in _bodies(symbol):
        url = path.format(run=edges["run"], container=edges["container"])
        error = edges["researcher"].call(method, url, body, 422)["error"]
        assert [d["field"] for d in error["details"]] == [field], (url, body, error)
        assert "not an element symbol" in error["details"][0]["message"]


def test_every_api_edge_accepts_a_symbol(edges):
    # the same requests with "Cd" pass the check (control for the test above)
    for method, path, body, _field in _bodies("Cd"):
        url = path.format(run=edges["run"], container=edges["container"])
        edges["researcher"].call(method, url, body, 201 if method == "POST" else 200)


# --- the database ------------------------------------------------------------------------------

# table -> [(column, vocabulary)], as service/store/models.py declares and migration 0007 creates.
CHECKED = {
    "users": [("role", vocab.ROLES)],
    "locations": [("kind", vocab.LOCATION_KINDS)],
    "procedures": [("state", vocab.PROCEDURE_STATES)],
    "runs": [("state", vocab.RUN_STATES)],
    "waste_containers": [("stream", vocab.STREAMS), ("state", vocab.CONTAINER_STATES)],
    "stock_elements": [("element", vocab.ELEMENT_SYMBOLS)],
    "mixture_elements": [("element", vocab.ELEMENT_SYMBOLS)],
    "waste_entry_elements": [("element", vocab.ELEMENT_SYMBOLS)],
    "waste_container_elements": [("element", vocab.ELEMENT_SYMBOLS)],  # created with it by 0008
    "stock_movements": [("kind", vocab.MOVEMENT_KINDS)],  # created with it by 0014
}
BAD_WORDS = ["chemist", "Researcher", "open ", ""]  # not a word of any vocabulary; wrong case; a space; nothing

NOW = dt.datetime(2026, 1, 5, 9, 30)  # naive UTC, as the columns store it
INSERTS = {  # (table, column) -> one row whose checked column is :value (other ids from the parents)
    ("users", "role"): "INSERT INTO users (email, display_name, role, password_hash, created_at, updated_at) "
                       "VALUES (:unique, 'x', :value, 'x', :now, :now)",
    ("locations", "kind"): "INSERT INTO locations (lab_id, building, room, storage, kind, created_at, updated_at) "
                           "VALUES (:lab, 'B', 'R', :unique, :value, :now, :now)",
    ("procedures", "state"): "INSERT INTO procedures (revision, lab_id, researcher_id, title, scale, state, created_at, "
                             "updated_at) VALUES (1, :lab, :user, 'raw', 1.0, :value, :now, :now)",
    ("runs", "state"): "INSERT INTO runs (procedure_id, lab_id, researcher_id, scale, state, started_at) "
                       "VALUES (:procedure, :lab, :user, 1.0, :value, :now)",
    ("waste_containers", "stream"): "INSERT INTO waste_containers (label, lab_id, location_id, stream, form, capacity_text, "
                                    "capacity_micro, acute_hazardous, state, created_at, updated_at) VALUES (:unique, :lab, "
                                    ":location, :value, 'liquid', '1 L', 1000000, false, 'open', :now, :now)",
    ("waste_containers", "state"): "INSERT INTO waste_containers (label, lab_id, location_id, stream, form, capacity_text, "
                                   "capacity_micro, acute_hazardous, state, created_at, updated_at) VALUES (:unique, :lab, "
                                   ":location, 'sharps', 'solid', '1 kg', 1000000000, false, :value, :now, :now)",
    ("stock_elements", "element"): "INSERT INTO stock_elements (stock_id, element, mass_ug) VALUES (:stock, :value, 1)",
    ("mixture_elements", "element"): "INSERT INTO mixture_elements (mixture_id, element, mass_ug) VALUES (:mixture, :value, 1)",
    ("waste_entry_elements", "element"): "INSERT INTO waste_entry_elements (entry_id, element, mass_ug) "
                                         "VALUES (:entry, :value, 1)",
    ("waste_container_elements", "element"): "INSERT INTO waste_container_elements (container_id, element, mass_ug) "
                                             "VALUES (:container, :value, 1)",
    ("stock_movements", "kind"): "INSERT INTO stock_movements (stock_id, kind, amount_text, quantity_micro, "
                                 "element_mass_ug, at) VALUES (:stock, :value, '1 mg', 1000, '{}', :now)",
}


@pytest.fixture
def migrated(database_url):
    """A database built by the migrations, with one parent row of each kind (ids in ``parents``)."""
    upgrade(database_url)
    engine = make_engine(database_url)
    with Session(engine) as session, session.begin():
        lab = Lab(code="K-1", name="Check lab")
        user = User(email="parent@test.example", display_name="parent", role="researcher", password_hash="x")
        substance = Substance(key="raw-cdo", name="raw CdO", formula="CdO", cas="1306-19-0", state="solid", source="test")
        session.add_all([lab, user, substance])
        session.flush()
        location = Location(lab_id=lab.id, building="K", room="K-1", storage="shelf", kind="storage")
        session.add(location)
        session.flush()
        stock = Stock(label="K-S", substance_id=substance.id, lab_id=lab.id, location_id=location.id,
                      amount_text="1 g", quantity_kind="mass", quantity_micro=1_000_000)
        mixture = Mixture(label="K-M", name="mix", lab_id=lab.id, location_id=location.id, volume_text="1 mL",
                          volume_ul=1000)
        procedure = Procedure(lab_id=lab.id, researcher_id=user.id, title="parent", state="draft")
        container = WasteContainer(label="K-W", lab_id=lab.id, location_id=location.id, stream="sharps", form="solid",
                                   capacity_text="1 kg", capacity_micro=10**9, state="open")
        session.add_all([stock, mixture, procedure, container])
        session.flush()
        entry = WasteEntry(container_id=container.id, description="parent")
        session.add(entry)
        session.flush()
        parents = {"lab": lab.id, "location": location.id, "user": user.id, "stock": stock.id, "mixture": mixture.id,
                   "procedure": procedure.id, "entry": entry.id, "container": container.id}
    yield engine, parents
    engine.dispose()


def _insert(engine, parents, table, column, value, unique):
    with engine.begin() as connection:
        connection.execute(text(INSERTS[table, column]), {**parents, "value": value, "unique": unique, "now": NOW})


def test_the_migrated_constraints_are_named_and_hold_the_vocabularies(migrated):
    engine, _parents = migrated
    inspector = inspect(engine)
    for table, checks in CHECKED.items():
        found = {c["name"]: c["sqltext"] for c in inspector.get_check_constraints(table)}
        for column, words in checks:
            name = f"ck_{table}_{column}"
            assert name in found, (table, sorted(found))
            # The quoted words of the constraint are the vocabulary: a word added to service/vocab.py
            # without a migration of its constraint fails here.
            assert set(re.findall(r"'([^']*)'", found[name])) == set(words), name


@pytest.mark.parametrize("table, column", list(INSERTS))
def test_every_word_is_accepted_and_anything_else_refused(migrated, table, column):
    engine, parents = migrated
    words = dict(CHECKED[table])[column]
    for n, word in enumerate(words):
        _insert(engine, parents, table, column, word, f"ok-{n}")
    for n, bad in enumerate(BAD_SYMBOLS + ["Uuo"] if column == "element" else BAD_WORDS):
        with pytest.raises(IntegrityError, match=f"ck_{table}_{column}"):
            _insert(engine, parents, table, column, bad, f"bad-{n}")


def _alembic(url: str) -> Config:
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS))
    config.set_main_option("sqlalchemy.url", url.replace("%", "%%"))
    return config


def test_the_demo_data_passes_the_checks_when_they_are_added(database_url, monkeypatch):
    """The demo scenario, written before migration 0007, survives it: PostgreSQL checks the existing rows
    when a constraint is added, SQLite copies them into the rebuilt table under the constraint."""
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", database_url)
    runner = CliRunner()
    for args in (["init"], ["demo"]):
        result = runner.invoke(main, args)
        assert result.exit_code == 0, result.output
    engine = make_engine(database_url)
    # waste_container_elements and stock_movements come after 0006 with their checks
    tables = [t for t in CHECKED if t not in ("waste_container_elements", "stock_movements")]
    try:
        with engine.connect() as connection:
            before = {t: connection.execute(text(f"SELECT COUNT(*) FROM {t}")).scalar_one() for t in tables}
        command.downgrade(_alembic(database_url), "0006_site")
        assert not any(inspect(engine).get_check_constraints(t) for t in tables)
        command.upgrade(_alembic(database_url), "head")
        with engine.connect() as connection:
            after = {t: connection.execute(text(f"SELECT COUNT(*) FROM {t}")).scalar_one() for t in tables}
        assert after == before and before["users"] == 4 and before["waste_containers"] == 4  # the demo's counts
        assert all(inspect(engine).get_check_constraints(t) for t in tables)
    finally:
        engine.dispose()
