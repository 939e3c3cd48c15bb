"""The run pages with the Flask test client, on the demo scenario: forms name their fields, refusals change
nothing, buttons and routes by role.

Who may record runs is the API's rule as tests/test_permissions.py writes it out (researcher, lab manager,
administrator). Expected numbers are worked here by hand: a draw × scale (25.7 mg × 0.5 = 12.85 mg), an
assay (concentration × volume: 100 mg/L × 4.0 mL = 0.400 mg), and the CdSe size from the first excitonic
peak by the sizing polynomial of Yu, Qu, Guo, Peng, Chem. Mater. 2003, 15, 2854 (550 nm -> 3.04 nm).
"""

from __future__ import annotations

import re

import pytest
from sqlalchemy import select

from service.store.db import session_scope
from service.store.models import Location, Procedure, Run, Stock
from tests.test_web_pages import demo  # noqa: F401 - the demo scenario's fixture
from tests.test_web_workflow import APPROVED, Browser


def _db(app):
    return session_scope(app.extensions["dotledger.sessions"])


def _approved_id(app) -> int:
    with _db(app) as session:
        return session.scalar(select(Procedure.id).where(Procedure.title == APPROVED, Procedure.state == "approved"))


def _stock(app, label: str) -> tuple[str, int]:
    with _db(app) as session:
        stock = session.scalar(select(Stock).where(Stock.label == label))
        return stock.amount_text, stock.quantity_micro


def _run_count(app) -> int:
    with _db(app) as session:
        return len(session.scalars(select(Run.id)).all())


def _post(browser: Browser, path: str, expect: int, **form) -> tuple[str, str]:
    response = browser.client.post(path, data={"csrf_token": browser.csrf, **form})
    assert response.status_code == expect, (path, response.status_code, re.findall(r"field-error[^<]*<", response.get_data(as_text=True)))
    return response.get_data(as_text=True), response.headers.get("Location", "")


def _error(page: str, field: str) -> str:
    """The error text shown next to ``field`` (its id-error paragraph)."""
    found = re.search(rf'<p class="field-error" id="{re.escape(field)}-error">(.*?)</p>', page, re.S)
    assert found, f"no error next to {field}"
    return found[1]


def _start_form(browser: Browser, ident: int) -> dict[str, str]:
    page = browser.get(f"/procedures/{ident}/runs/new")
    return dict(re.findall(r'id="(draws-\d+-amount)" name="[^"]+" value="([^"]*)"', page))


@pytest.fixture
def researcher(demo):
    return Browser(demo, "researcher@example.org")


def _started(demo, researcher) -> int:
    app, _ = demo
    ident = _approved_id(app)
    amounts = _start_form(researcher, ident)
    _, where = _post(researcher, f"/procedures/{ident}/runs/new", 303, action="start", scale="1", **amounts)
    return int(re.search(r"/runs/(\d+)\?done=started", where)[1])


def test_start_button_by_role(demo):
    app, _ = demo
    ident = _approved_id(app)
    assert "Start a run" in Browser(demo, "researcher@example.org").get(f"/procedures/{ident}")
    officer = Browser(demo, "safety@example.org")
    assert "Start a run" not in officer.get(f"/procedures/{ident}")
    officer.get(f"/procedures/{ident}/runs/new", expect=403)  # the server refuses what the button would do
    before = _run_count(app)
    _post(officer, f"/procedures/{ident}/runs/new", 403, action="start", scale="1")
    assert _run_count(app) == before


def test_start_form_is_the_plan_times_the_scale(demo, researcher):
    app, _ = demo
    ident = _approved_id(app)
    amounts = _start_form(researcher, ident)
    assert amounts["draws-0-amount"] == "25.7 mg"  # the demo plan's CdO draw at scale 1
    page, _ = _post(researcher, f"/procedures/{ident}/runs/new", 200, action="rescale", scale="0.5")
    assert 'value="12.85 mg"' in page  # 25.7 mg × 0.5, worked by hand


@pytest.mark.parametrize("scale", ["0", "1.01", "x"])
def test_rescale_beyond_the_approved_scale_is_refused(demo, researcher, scale):
    ident = _approved_id(demo[0])
    page, _ = _post(researcher, f"/procedures/{ident}/runs/new", 422, action="rescale", scale=scale)
    assert "at most the approved scale 1" in _error(page, "scale")


def test_a_draw_beyond_the_stock_is_refused_next_to_that_draw_and_takes_nothing(demo, researcher):
    app, _ = demo
    ident = _approved_id(app)
    amounts = _start_form(researcher, ident)
    held_before = _stock(app, "NG-0001")
    runs_before = _run_count(app)
    page, _ = _post(researcher, f"/procedures/{ident}/runs/new", 409, action="start", scale="1",
                    **{**amounts, "draws-0-amount": "900 g"})
    assert "NG-0001 holds" in _error(page, "draws-0-amount")
    assert 'href="#draws-0-amount"' in page  # the summary links to the field
    assert _stock(app, "NG-0001") == held_before and _run_count(app) == runs_before
    # beside it: a bad amount names its row; a scale beyond the approved one names the scale
    page, _ = _post(researcher, f"/procedures/{ident}/runs/new", 422, action="start", scale="1",
                    **{**amounts, "draws-1-amount": "lots"})
    assert _error(page, "draws-1-amount")
    page, _ = _post(researcher, f"/procedures/{ident}/runs/new", 409, action="start", scale="2", **amounts)
    assert "beyond the approved scale" in _error(page, "scale")
    assert _stock(app, "NG-0001") == held_before and _run_count(app) == runs_before


def test_start_takes_the_draws(demo, researcher):
    app, _ = demo
    _, before = _stock(app, "NG-0001")
    run_id = _started(demo, researcher)
    _, after = _stock(app, "NG-0001")
    assert before - after == 25_700  # µg: 25.7 mg drawn
    page = researcher.get(f"/runs/{run_id}?done=started")
    assert "Run started" in page and "Close the run" in page and "Record an output" in page
    assert page.count('<figure class="chart"') >= 2  # Cd and Se, each its own chart
    assert "Cd: input against where it went (mg)" in page


def test_output_by_assay_and_the_balance(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    form = researcher.get(f"/runs/{run_id}/outputs/new")
    assert 'for="assays-0-concentration">Cd concentration' in form
    _, where = _post(researcher, f"/runs/{run_id}/outputs/new", 303, action="save", method="assay",
                     label="CdSe cores in hexane", **{"assays-0-concentration": "100 mg/L", "assays-0-volume": "4.0 mL"})
    page = researcher.get(where)
    assert "Output recorded." in page
    # 100 mg/L × 4.0 mL = 0.400 mg of Cd as product, in the chart's table
    assert re.search(r'<th scope="row">product</th><td class="num">0\.400</td>', page)


def test_output_errors_name_their_fields_and_store_nothing(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    path = f"/runs/{run_id}/outputs/new"
    page, _ = _post(researcher, path, 422, action="save", method="mass", label="x", **{"elements-0-mass": "lots"})
    assert _error(page, "elements-0-mass")
    page, _ = _post(researcher, path, 422, action="save", method="assay", label="",
                    **{"assays-1-concentration": "5 mg/L", "assays-1-volume": "2 L/mg"})
    assert _error(page, "label") and _error(page, "assays-1-volume")  # the Se row, not renumbered to 0
    page, _ = _post(researcher, path, 422, action="save", label="x")
    assert _error(page, "method")
    with _db(app) as session:
        assert not session.get(Run, run_id).outputs


def test_estimate_from_absorbance_shows_size_and_stores_nothing(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    fields = {"estimate-core": "CdSe", "estimate-wavelength_nm": "550", "estimate-absorbance": "0.5",
              "estimate-path_length_cm": "1", "estimate-dilution_factor": "100", "estimate-volume": "4.0 mL"}
    page, _ = _post(researcher, f"/runs/{run_id}/outputs/new", 200, action="estimate", method="estimate", label="",
                    **fields)
    assert "Core diameter</dt><dd>3.04 nm" in page  # Yu et al. 2003 polynomial at 550 nm: 3.0403 nm
    assert "Particle concentration" in page and "µmol/L" in page
    with _db(app) as session:
        assert not session.get(Run, run_id).outputs
    page, _ = _post(researcher, f"/runs/{run_id}/outputs/new", 422, action="estimate", method="estimate", label="",
                    **{**fields, "estimate-absorbance": "-1"})
    assert _error(page, "estimate-absorbance")
    _, where = _post(researcher, f"/runs/{run_id}/outputs/new", 303, action="save", method="estimate",
                     label="cores by absorbance", **fields)
    assert "(absorbance)" in researcher.get(where)


def test_loss_and_close_refused_then_nothing_changes(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    page, _ = _post(researcher, f"/runs/{run_id}/losses/new", 422, description="ab", **{"elements-0-mass": "1 mg"})
    assert _error(page, "description")
    _, where = _post(researcher, f"/runs/{run_id}/losses/new", 303, description="film left in the flask",
                     **{"elements-0-mass": "0.5 mg"})
    assert "film left in the flask" in researcher.get(where)
    page, _ = _post(researcher, f"/runs/{run_id}/close", 409)
    assert "Not closed" in page and "does not close" in page
    with _db(app) as session:
        assert session.get(Run, run_id).state == "open"


def test_roles_on_the_run_page(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    officer = Browser(demo, "safety@example.org")
    page = officer.get(f"/runs/{run_id}")
    assert "Close the run" not in page and "Record an output" not in page
    _post(officer, f"/runs/{run_id}/close", 403)
    _post(officer, f"/runs/{run_id}/losses/new", 403, description="film left", **{"elements-0-mass": "1 mg"})
    with _db(app) as session:
        run = session.get(Run, run_id)
        assert run.state == "open" and not run.losses


def test_product_into_the_inventory(demo, researcher):
    app, _ = demo
    run_id = _started(demo, researcher)
    _, where = _post(researcher, f"/runs/{run_id}/outputs/new", 303, action="save", method="mass", label="cores",
                     **{"elements-0-mass": "10 mg", "elements-1-mass": "7 mg"})
    with _db(app) as session:
        output_id = session.get(Run, run_id).outputs[0].id
        location = session.scalars(select(Location.id)).first()
    page = researcher.get(where)
    path = f"/runs/{run_id}/outputs/{output_id}/stock"
    assert f'href="{path}"' in page
    page, _ = _post(researcher, path, 422, label="", location_id=str(location), amount="4.0 mL")
    assert _error(page, "label")
    assert _run_count(app) and _stock_count(app, "NG-P77") == 0
    _, where = _post(researcher, path, 303, label="NG-P77", location_id=str(location), amount="4.0 mL")
    with _db(app) as session:
        stock = session.scalar(select(Stock).where(Stock.label == "NG-P77"))
        assert {e.element: e.mass_ug for e in stock.elements} == {"Cd": 10_000, "Se": 7_000}  # exactly the output
    assert "stock NG-P77" in researcher.get(where)
    page, _ = _post(researcher, path, 409, label="NG-P78", location_id=str(location), amount="4.0 mL")
    assert "becomes one stock" in _error(page, "output_id")


def _stock_count(app, label: str) -> int:
    with _db(app) as session:
        return len(session.scalars(select(Stock.id).where(Stock.label == label)).all())


def test_runs_list_filters_and_procedure_page(demo, researcher):
    app, _ = demo
    ident = _approved_id(app)
    run_id = _started(demo, researcher)
    closed = researcher.get("/runs?state=closed")
    assert 'href="/runs/1"' in closed and f'href="/runs/{run_id}"' not in closed
    open_ = researcher.get("/runs?state=open")
    assert f'href="/runs/{run_id}"' in open_ and 'href="/runs/1"' not in open_
    assert f'href="/runs/{run_id}"' in researcher.get(f"/runs?procedure_id={ident}")
    assert "No runs match." in researcher.get(f"/runs?procedure_id={ident + 1000}")
    researcher.get("/runs?state=burning", expect=422)
    page = researcher.get("/runs?limit=1")
    assert "Showing 1–1 of 2 runs" in page and 'rel="next"' in page
    assert f'href="/runs/{run_id}"' in researcher.get(f"/procedures/{ident}")
