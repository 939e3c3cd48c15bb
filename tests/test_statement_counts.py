"""No N+1 queries: every list of the API and every list page costs a fixed handful of SQL statements.

The demo scenario plus 100+ rows of everything a list shows; the app's engine counts the
statements it sends (``before_cursor_execute``) during each request. A list of 100 rows must
cost what a list of 5 costs.
"""

from __future__ import annotations

from collections import Counter

import pytest
from click.testing import CliRunner
from sqlalchemy import event, select

from service.app import create_app
from service.cli import main
from service.schemas import (
    ComponentIn,
    ContainerIn,
    PlannedDrawIn,
    ElementAmountIn,
    EntryComponentIn,
    EntryIn,
    LabIn,
    LocationIn,
    MixtureIn,
    ProcedureIn,
    RunIn,
    ShipIn,
    StepIn,
    StockIn,
    UserIn,
    WastePlanIn,
)
from service.store import identity, inventory, movements, procedures, runs, waste
from service.store.db import session_scope
from service.store.models import Lab, Location, Substance, User, WasteContainer
from tests.test_cli import sign_in

ROWS = 105
# BEGIN, the caller (token or cookie user, memberships), the list (and its total), the eager loads of
# its rows, and the record a nested list belongs to (read first, with its own eager loads).
HANDFUL = 15


def _seed(app) -> dict[str, int]:
    """ROWS of every listed record, written through the service functions."""
    rules = app.extensions["dotledger.rules"]
    with session_scope(app.extensions["dotledger.sessions"]) as s:
        s.info["actor"] = {"user_id": None, "label": "test seed"}
        lab = s.scalar(select(Lab).where(Lab.code == "C-214"))
        saa = s.scalar(select(Location).where(Location.kind == "satellite_accumulation_area"))
        researcher = s.scalar(select(User).where(User.email == "researcher@example.org"))
        officer = s.scalar(select(User).where(User.email == "safety@example.org"))
        admin = s.scalar(select(User).where(User.email == "admin@example.org"))
        cdo, acetone, ode = (s.scalar(select(Substance.id).where(Substance.key == key))
                             for key in ("cadmium-oxide", "acetone", "1-octadecene"))
        for n in range(ROWS):
            inventory.create_record(s, Lab, LabIn(code=f"S-{n}", name=f"Seed lab {n}"))
            inventory.create_record(s, Location, LocationIn(lab_id=lab.id, building="S", room=f"S-{n}", storage="shelf"))
            identity.create_user(s, UserIn(email=f"seed{n}@example.org", display_name=f"Seed {n}", role="researcher",
                                           password="correct horse battery", lab_ids=[lab.id]))
            identity.issue_token(s, admin, f"seed {n}")
        stocks = [inventory.create_stock(s, StockIn(label=f"S-{n:04d}", substance_id=cdo if n % 2 else acetone,
                                                    lab_id=lab.id, location_id=saa.id,
                                                    amount="10 g" if n % 2 else "1 L"))
                  for n in range(ROWS)]
        for n in range(ROWS):
            inventory.create_mixture(s, MixtureIn(label=f"S-M{n}", name=f"seed oleate {n}", lab_id=lab.id,
                                                  location_id=saa.id, volume="10 mL", received_as_solution=True,
                                                  components=[ComponentIn(substance_id=cdo, molarity="0.1 mol/L"),
                                                              ComponentIn(substance_id=ode, volume_fraction=0.9)]))
        procs = []
        for n in range(ROWS):
            body = ProcedureIn(lab_id=lab.id, title=f"Seed batch {n}",
                               steps=[StepIn(operation="hold", temperature_c=20, atmosphere="argon")],
                               draws=[PlannedDrawIn(stock_id=stocks[k].id, amount="1 mg" if k % 2 else "1 mL")
                                      for k in (n, (n + 1) % ROWS)],
                               waste_plan=[WastePlanIn(stream="contaminated solids", contents="wipes")])
            proc = procedures.create_procedure(s, body, researcher)
            procedures.transition(s, proc, "submit", researcher, None, rules)
            procs.append(proc)
        for proc in procs[: ROWS // 2]:
            procedures.transition(s, proc, "approve", officer, "reviewed for the statement count", rules)
        runs_made = [runs.start_run(s, RunIn(procedure_id=procs[n % (ROWS // 2)].id), researcher, rules)
                     for n in range(ROWS)]
        containers = [waste.create_container(s, ContainerIn(label=f"S-W{n}", lab_id=lab.id, location_id=saa.id,
                                                            stream="non_halogenated_solvent_heavy_metals",
                                                            capacity="200 L"))
                      for n in range(ROWS)]
        for n, container in enumerate(containers):
            waste.add_entry(s, container.id, EntryIn(description=f"wash {n}", volume="10 mL",
                                                     components=[EntryComponentIn(substance_id=acetone, volume="5 mL")],
                                                     elements=[ElementAmountIn(element="Cd", mass="1 mg")]),
                            researcher.id)
        for n in range(ROWS):  # one container with ROWS entries, each from its own run, half of them with ODE
            waste.add_entry(s, containers[0].id, EntryIn(
                description=f"supernatant {n}", volume="10 mL", run_id=runs_made[n].id,
                components=[EntryComponentIn(substance_id=acetone if n % 2 else ode, volume="5 mL")],
                # each run draws 1 mg CdO (0.875 mg Cd, no Se): an entry takes at most what its run has left
                elements=[ElementAmountIn(element="Cd", mass="0.5 mg"), ElementAmountIn(element="O", mass="0.1 mg")]),
                researcher.id)
        for n in range(ROWS):  # ROWS shipments out of one stock
            movements.ship(s, stocks[1].id, ShipIn(destination=f"collaborator {n}", amount="1 mg"), researcher.id)
        return {"container": containers[0].id, "procedure": procs[0].id, "stock": stocks[1].id,
                "small_container": containers[1].id, "acetone": acetone}


@pytest.fixture(scope="module")
def seeded(tmp_path_factory):
    url = f"sqlite:///{tmp_path_factory.mktemp('counts') / 'counts.sqlite'}"
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("DOTLEDGER_DATABASE_URL", url)
        result = CliRunner().invoke(main, ["demo"])
    assert result.exit_code == 0, result.output
    passwords = dict(line.split() for line in result.output.splitlines() if line.startswith("  ") and "@" in line)
    app = create_app({"DATABASE_URL": url})
    ids = _seed(app)
    statements = []
    event.listen(app.extensions["dotledger.engine"], "before_cursor_execute",
                 lambda conn, cursor, statement, *args: statements.append(statement))
    with session_scope(app.extensions["dotledger.sessions"]) as s:
        admin = s.scalar(select(User).where(User.email == "admin@example.org"))
        token = identity.issue_token(s, admin, "counts").secret
    page_client = app.test_client()
    sign_in(page_client, "admin@example.org", passwords["admin@example.org"])
    yield {"app": app, "ids": ids, "token": token, "pages": page_client, "statements": statements}
    app.extensions["dotledger.engine"].dispose()


def _summary(statements: list[str]) -> str:
    """Each distinct statement (its start) with how often it ran: an N+1 shows as a large count."""
    counts = Counter(" ".join(statement.split())[:160] for statement in statements)
    return "\n".join(f"{n:5d} × {text}" for text, n in counts.most_common())


def _count(seeded, client, path: str, **kwargs) -> tuple[int, object]:
    del seeded["statements"][:]
    response = client.get(path.format(**seeded["ids"]), **kwargs)
    assert response.status_code == 200, (path, response.status_code, response.get_data(as_text=True)[:500])
    return len(seeded["statements"]), response


# path, how many rows the seeded list holds at least; every list asks for its largest page (limit 500)
API_LISTS = [
    ("/labs", ROWS), ("/locations", ROWS), ("/substances", 40), ("/stocks", ROWS), ("/mixtures", ROWS),
    ("/procedures", ROWS), ("/review_queue", ROWS // 2), ("/runs", ROWS), ("/waste_containers", ROWS),
    ("/waste_containers/{container}/entries", ROWS), ("/tokens", ROWS), ("/users", ROWS),
    ("/audit_events", ROWS), ("/procedures/{procedure}/revisions", 1), ("/procedures/{procedure}/decisions", 2),
    ("/stock_movements", ROWS), ("/stocks/{stock}/movements", ROWS),
]
PAGES = ["/", "/stocks", "/mixtures", "/procedures", "/review", "/waste", "/waste/{container}"]


@pytest.mark.parametrize("path, rows", API_LISTS)
def test_api_lists_cost_a_fixed_handful_of_statements(seeded, path, rows):
    client = seeded["app"].test_client()
    headers = {"Authorization": f"Bearer {seeded['token']}"}
    count, response = _count(seeded, client, f"/api/v1{path}?limit=500", headers=headers)
    body = response.get_json()
    assert body["total"] >= rows and len(body["items"]) == min(body["total"], 500), (path, body["total"])
    assert count <= HANDFUL, f"{path}: {count} statements\n{_summary(seeded['statements'])}"


@pytest.mark.parametrize("path", ["/labs", "/stocks", "/mixtures", "/procedures", "/audit_events"])
def test_a_list_of_100_costs_what_a_list_of_5_costs(seeded, path):
    client = seeded["app"].test_client()
    headers = {"Authorization": f"Bearer {seeded['token']}"}
    few, _ = _count(seeded, client, f"/api/v1{path}?limit=5", headers=headers)
    many, _ = _count(seeded, client, f"/api/v1{path}?limit=100", headers=headers)
    assert many == few, (path, few, many)


# The home page gathers the sections of the signed-in role (an administrator's: procedures, runs, review
# queue, containers, pickups, inventory, waste by stream); each costs a fixed few statements, whatever the rows.
HOME_HANDFUL = 30
# A container's page adds to its record and entries the area it is in and one query for the metal-over-
# time chart (entries × elements in time order): a fixed few more, whatever the entries.
CONTAINER_HANDFUL = HANDFUL + 2


@pytest.mark.parametrize("path", PAGES)
def test_list_pages_cost_a_fixed_handful_of_statements(seeded, path):
    count, _ = _count(seeded, seeded["pages"], path)
    budget = {"/": HOME_HANDFUL, "/waste/{container}": CONTAINER_HANDFUL}.get(path, HANDFUL)
    assert count <= budget, f"{path}: {count} statements\n{_summary(seeded['statements'])}"


# Adding an entry on SQLite: BEGIN (IMMEDIATE: the write lock); the caller (token, user and memberships in
# one); the container with its totals row (its element and component sums are added to, never read); the
# substance of the one component; the entry, its element and component rows; the running totals (entry
# count and volume; element and component sums, one upsert each); the audit chain (head locked, events,
# head); the month's totals (one upsert); the accumulation area with its containers' totals (one statement;
# the chain's head, locked already, orders two changes to one area). 15; COMMIT is not a statement the
# cursor sends. Nothing re-sums the entries, nothing reads the new rows back. (PostgreSQL: 14, as its BEGIN
# is not sent through the cursor; the entry id is drawn in the container's statement.)
ENTRY_STATEMENTS = 15


def test_adding_an_entry_costs_a_fixed_few_statements_whatever_the_container_holds(seeded):
    client = seeded["app"].test_client()
    headers = {"Authorization": f"Bearer {seeded['token']}"}
    ids = seeded["ids"]
    body = {"description": "statement count", "volume": "2 mL",
            "components": [{"substance_id": ids["acetone"], "volume": "1 mL"}],
            "elements": [{"element": "Cd", "mass": "0.01 mg"}]}
    counts, seen = {}, {}
    for key in ("small_container", "container"):  # 1 entry before, then ROWS + 1 entries before
        del seeded["statements"][:]
        response = client.post(f"/api/v1/waste_containers/{ids[key]}/entries", json=body, headers=headers)
        assert response.status_code == 201, response.get_data(as_text=True)[:500]
        counts[key], seen[key] = len(seeded["statements"]), _summary(seeded["statements"])
    assert counts["container"] == counts["small_container"], seen
    assert counts["container"] <= ENTRY_STATEMENTS, f"{counts['container']} statements\n{seen['container']}"
    assert not any("sum(" in text.lower() for text in seeded["statements"]), seen["container"]
