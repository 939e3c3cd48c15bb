"""The ledger page with the Flask test client: the worked month of tests/test_site_ledger.py (figures
computed there by hand from the amounts recorded, with the molar masses of molmass) shown per element,
every figure opening records that add up to it, the downloads, the roles, and refusals naming the field."""

from __future__ import annotations

import html
import io
import re
from decimal import Decimal

import pandas as pd
import pytest

from service.balance.site import FIGURES
from tests.conftest import make_user
from tests.test_cli import sign_in
from tests.test_site_ledger import _work_the_month, month  # noqa: F401  (the worked month fixture)

PASSWORD = "correct horse battery"  # tests.conftest.make_user's default
SITE_ROLES = ("safety_officer", "lab_manager", "auditor", "admin")


def _page_client(app, role: str, email: str | None = None):
    email = email or f"{role}.page@test.example"
    make_user(app, email, role)
    client = app.test_client()
    sign_in(client, email, PASSWORD)
    return client


def _mg(ug: int) -> str:
    """µg as the page writes mg: exact, three decimals, thousands separated (templates/pages/_parts.html mg)."""
    return f"{Decimal(ug) / 1000:,.3f}"


def _figure_links(page: str) -> list[tuple[str, str, str, str]]:
    """(element, month, figure, text shown) of every figure link of the ledger tables."""
    found = re.findall(r'<a class="figure" href="([^"]+)"[^>]*>([^<]+)</a>', page)
    out = []
    for href, text in found:
        query = dict(part.split("=", 1) for part in html.unescape(href).split("?", 1)[1].split("&"))
        out.append((query["element"], query["month"], query["figure"], text))
    return out


def test_the_worked_month_on_the_page_and_in_its_drill_downs(month, app):
    expected = _work_the_month(month)
    client = _page_client(app, "safety_officer")
    response = client.get("/ledger")
    page = response.get_data(as_text=True)
    assert response.status_code == 200, page
    links = _figure_links(page)
    this = month["officer"].call("GET", "/reports/elements?element=Cd")["rows"][-1]["month"]
    for element in ("Cd", "Se"):
        shown = {figure: text for el, m, figure, text in links if el == element and m == this}
        # Each figure as computed by hand in tests/test_site_ledger.py, written in mg.
        assert shown == {figure: _mg(expected[element][figure]) for figure in FIGURES}, element
        for figure in FIGURES:
            drill = client.get(f"/ledger/figure?element={element}&month={this}&figure={figure}")
            text = drill.get_data(as_text=True)
            assert drill.status_code == 200, text
            parts = re.findall(r'<td class="num">(-?[\d,]+\.\d{3})</td></tr>', text.split("<tbody>", 1)[1].split("</tbody>")[0])
            total = sum(Decimal(p.replace(",", "")) for p in parts)
            assert total == Decimal(expected[element][figure]) / 1000, (element, figure)
            assert f'<span id="stated">{_mg(expected[element][figure])}</span>' in text
            assert f'<span id="sum">{_mg(expected[element][figure])}</span>' in text
            assert "yes — the records add up to the figure" in text
    # The equation, on the page's own numbers: opening + received = the rest (DESIGN.md "site element ledger").
    for element in ("Cd", "Se"):
        n = {figure: Decimal(text.replace(",", "")) for el, m, figure, text in links if el == element and m == this}
        assert n["opening"] + n["received"] == sum(n[f] for f in FIGURES[2:])
    assert "local regulations and the site safety officer" in page
    assert 'href="/ledger"' in page  # the navigation offers the page to the safety officer


def test_waste_by_stream_and_on_hand_agree_with_the_api_reports(month, app):
    _work_the_month(month)
    officer = month["officer"]
    page = _page_client(app, "safety_officer").get("/ledger").get_data(as_text=True)
    # The charts' tables: one per element, a column per stream; each cell the waste report's figure in mg.
    waste = officer.call("GET", "/reports/waste?by=element,stream,month")["rows"]
    assert waste
    for row in waste:
        title = f"{row['element']} into waste per month by stream"
        assert title in page
        chart = page.split(title, 1)[1].split("</figure>", 1)[0]
        assert row["stream"].replace("_", " ") in chart
        assert _mg(row["mass_ug"]) in chart, (row, chart[:400])  # exact mg, as the tables
    # On hand per lab: the inventory report grouped by element and lab.
    on_hand = officer.call("GET", "/reports/inventory?by=element,lab")["rows"]
    table = page.split("Element mass on hand per lab (mg)", 1)[1].split("</table>", 1)[0]
    tracked = [row for row in on_hand if row["element"] in ("Cd", "Se")]
    assert tracked and all(_mg(row["mass_ug"]) in table for row in tracked)
    assert "<th scope=\"row\">C</th>" not in table  # carbon from the solvents is not a tracked element
    # The generator category per month, as the generator report gives it.
    generator = officer.call("GET", "/reports/generator_category")
    section = page.split("Generator category per month", 1)[1]
    assert generator["months"][-1]["month"] in section
    assert generator["months"][-1]["category"].replace("_", " ") in section


def test_downloads_are_the_api_reports(month, app):
    expected = _work_the_month(month)
    client = _page_client(app, "auditor")
    officer = month["officer"]
    csv = client.get("/ledger/download?report=elements&format=csv&element=Cd")
    assert csv.status_code == 200 and csv.mimetype == "text/csv"
    assert csv.headers["Content-Disposition"].startswith('attachment; filename="dotledger-elements-')
    frame = pd.read_csv(io.BytesIO(csv.data), skiprows=1)
    assert int(frame.iloc[-1]["closing_ug"]) == expected["Cd"]["closing"]
    api = officer.client.get("/api/v1/reports/elements?element=Cd&format=csv",
                             headers={"Authorization": f"Bearer {officer.token}"})
    pd.testing.assert_frame_equal(frame, pd.read_csv(io.BytesIO(api.data), skiprows=1))
    xlsx = client.get("/ledger/download?report=waste&format=xlsx")
    assert xlsx.status_code == 200 and xlsx.data[:2] == b"PK"  # a ZIP container (ECMA-376 part 2)
    sheet = pd.read_excel(io.BytesIO(xlsx.data), sheet_name="waste")
    rows = officer.call("GET", "/reports/waste?by=element,stream,month")["rows"]
    assert sorted(sheet["mass_ug"].tolist()) == sorted(r["mass_ug"] for r in rows)
    inventory = client.get("/ledger/download?report=inventory&format=csv")
    assert pd.read_csv(io.BytesIO(inventory.data), skiprows=1)["mass_ug"].sum() == \
        sum(r["mass_ug"] for r in officer.call("GET", "/reports/inventory?by=element,lab")["rows"])


@pytest.mark.parametrize("role", SITE_ROLES)
def test_site_roles_open_the_ledger(app, role):
    client = _page_client(app, role)
    for path in ("/ledger", "/ledger/figure?element=Cd&month=2026-01&figure=into_waste",
                 "/ledger/download?report=elements&format=csv"):
        assert client.get(path).status_code == 200, path


def test_researchers_are_refused_the_site_ledger(app):
    client = _page_client(app, "researcher")
    for path in ("/ledger", "/ledger/figure?element=Cd&month=2026-01&figure=into_waste",
                 "/ledger/download?report=elements&format=csv"):
        response = client.get(path)
        assert response.status_code == 403 and "text/html" in response.content_type, path
    assert 'href="/ledger"' not in client.get("/procedures").get_data(as_text=True)


@pytest.mark.parametrize("path, field", [
    ("/ledger?since=2026-13", "since"),                      # no 13th month
    ("/ledger?until=2026-00", "until"),                      # nor a month 0
    ("/ledger?since=2026-05&until=2026-04", "since"),        # since after until
    ("/ledger?element=Xx", "element"),                       # not an element
    ("/ledger/figure?element=Cd&month=2026-01&figure=bogus", "figure"),
    ("/ledger/figure?element=Cd&figure=received", "month"),  # a month is needed
    ("/ledger/download?report=everything", "report"),
    ("/ledger/download?format=pdf", "format"),
])
def test_bad_filters_are_refused_naming_the_field(app, path, field):
    response = _page_client(app, "safety_officer").get(path)
    page = response.get_data(as_text=True)
    assert response.status_code == 422, page
    assert f"<strong>{field}</strong>" in page or field in page.split("Reason:", 1)[-1]


def test_the_month_range_and_element_filter(month, app):
    _work_the_month(month)
    client = _page_client(app, "lab_manager")
    page = client.get("/ledger?element=Se").get_data(as_text=True)
    elements = {el for el, *_ in _figure_links(page)}
    assert elements == {"Se"}
    # A range before any record: every figure of every month is 0 and nothing is on the tables.
    empty = client.get("/ledger?since=2001-01&until=2001-02").get_data(as_text=True)
    assert "No element moved or was on hand in these months." in empty
