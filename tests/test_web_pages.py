"""The read-only procedure, review, run and waste pages, on the demo scenario."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from service.app import create_app
from service.cli import main
from service.schemas import ContainerIn, LabIn, LocationIn
from service.store import inventory, waste
from service.store.db import session_scope
from service.store.models import Lab, Location, Procedure, User, WasteContainer
from tests.test_cli import sign_in

CAUTION = ("local regulations", "site safety officer")


@pytest.fixture
def demo(sqlite_url, monkeypatch):
    """The demo database and the app on it; yields (app, {email: password})."""
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    result = CliRunner().invoke(main, ["demo"])
    assert result.exit_code == 0, result.output
    passwords = dict(line.split() for line in result.output.splitlines() if line.startswith("  ") and "@" in line)
    app = create_app({"DATABASE_URL": sqlite_url})
    yield app, passwords
    app.extensions["dotledger.engine"].dispose()


def _client(demo, email: str):
    app, passwords = demo
    client = app.test_client()
    sign_in(client, email, passwords[email])
    return client


def _ids(app) -> dict[str, int]:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return {"cdse": session.query(Procedure.id).filter(Procedure.title == "CdSe cores by hot injection").scalar(),
                "solvent": session.query(WasteContainer.id).filter(WasteContainer.label == "NG-W01").scalar(),
                "solids": session.query(WasteContainer.id).filter(WasteContainer.label == "NG-W04").scalar()}


@pytest.mark.parametrize("path, expected", [
    ("/procedures", ["CdSe cores by hot injection", "CsPbBr3 perovskite nanocrystals", "lv-review"]),
    ("/procedures/{cdse}", ["CdSe cores by hot injection", "TOP-Se 1.0 M", "Element masses per batch",
                            "class=\"bar el-Cd\"", "site.carcinogen-designated-area", "site-example@2026.12",
                            "supernatants and acetone washes", "Rule packs:", "Approval rests with the site safety"]),
    ("/review", ["CdSe/ZnS core-shell growth"]),
    ("/waste", ["NG-W01", "NG-W04", "non halogenated solvent heavy metals", "% of 20 L", "Cd (mg/L)"]),
    ("/waste/{solvent}", ["first supernatant (ODE, acetone)", "RCRA D001", "RCRA F003", "suggested — for review",
                          "acetone", "66.7", "run 1", "The waste determination rests with the site safety officer"]),
    ("/waste/{solids}", ["gloves, pipette tips, wipes", "35.000"]),
    ("/mixtures", ["NG-M02", "1.5794 g from NG-0003", "(Se 1,579.2 mg)", "18 mL from NG-0009"]),
    ("/runs/1", ["Mass balance", "CdSe cores in hexane", "measured", "NG-0001", "100.0", ">closes<", "22.496"]),
    ("/stocks", ["NG-P01", "cadmium selenide", '<a href="/runs/1">from run 1</a>', "15.7"]),
])
def test_pages_for_the_safety_officer(demo, path, expected):
    client = _client(demo, "safety@example.org")
    response = client.get(path.format(**_ids(demo[0])))
    page = response.get_data(as_text=True)
    assert response.status_code == 200, page
    for text in [*expected, *CAUTION]:
        assert text in page, text


def test_review_queue_is_not_for_researchers(demo):
    client = _client(demo, "researcher@example.org")
    forbidden = client.get("/review")
    assert forbidden.status_code == 403 and "text/html" in forbidden.content_type
    page = client.get("/procedures").get_data(as_text=True)
    assert 'href="/review"' not in page and 'href="/waste"' in page  # the nav offers only what the role may open
    assert 'href="/review"' in _client(demo, "safety@example.org").get("/procedures").get_data(as_text=True)


@pytest.mark.parametrize("path", ["/procedures/999", "/waste/999", "/runs/999"])
def test_unknown_ids_are_404_pages(demo, path):
    response = _client(demo, "safety@example.org").get(path)
    assert response.status_code == 404 and "text/html" in response.content_type
    assert "site safety officer" in response.get_data(as_text=True)


def test_another_labs_container_is_403_for_a_researcher(demo):
    app, _ = demo
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test"}
        lab = inventory.create_record(session, Lab, LabIn(code="X-9", name="Other group"))
        place = inventory.create_record(session, Location, LocationIn(lab_id=lab.id, building="X", room="X-9",
                                                                      storage="hood"))
        other = waste.create_container(session, ContainerIn(label="X-W1", lab_id=lab.id, location_id=place.id,
                                                            stream="contaminated_solids", capacity="5 kg")).id
    researcher = _client(demo, "researcher@example.org")
    assert researcher.get(f"/waste/{other}").status_code == 403
    assert "X-W1" not in researcher.get("/waste").get_data(as_text=True)
    assert "X-W1" in _client(demo, "safety@example.org").get("/waste").get_data(as_text=True)


def test_untrusted_text_is_escaped_and_reversals_are_marked(demo):
    app, _ = demo
    ids = _ids(app)
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        session.info["actor"] = {"user_id": None, "label": "test"}
        session.get(Procedure, ids["cdse"]).title = "<script>alert('t')</script> CdSe"
        officer = session.query(User.id).filter(User.email == "safety@example.org").scalar()
        waste.reverse_entry(session, ids["solvent"], 2, "<b>wrong</b> container", officer)
    client = _client(demo, "safety@example.org")
    for path in ("/procedures", f"/procedures/{ids['cdse']}", "/runs/1"):
        page = client.get(path).get_data(as_text=True)
        assert "<script>alert" not in page and "&lt;script&gt;alert(&#39;t&#39;)&lt;/script&gt; CdSe" in page, path
    page = client.get(f"/waste/{ids['solvent']}").get_data(as_text=True)
    assert "<b>wrong</b>" not in page and "&lt;b&gt;wrong&lt;/b&gt; container" in page
    assert "reversal of #2" in page and 'class="reversed"' in page and 'class="reversal"' in page
