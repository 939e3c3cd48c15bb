"""Every number format people read, one table: concentrations to 3 significant figures, percentages to one
decimal, one spelling of each unit — checked through the pure functions (service.chem.figures), a rendered
page (Flask test client), the API's finding text and a rendered waste manifest (PDF text via pypdf).

Sources:
- Significant figures and rounding: SI Brochure (BIPM, 9th ed., 2019) §5.4 and ISO 80000-1:2009 Annex B
  (rounding to the nearest multiple; a tie goes to the even multiple) — from memory; 3 significant figures for
  a measured concentration and one decimal for a percentage are common practice, not a standard's rule.
- SI Brochure §5.4.7 (from memory): a space between a number and "%"; the litre's symbol L (or l), of
  which this service uses L only, as US regulations do (40 CFR 261.24 Table 1 writes "mg/L").
- 40 CFR 261.24(b) Table 1 (seen): D006 cadmium, 1.0 mg/L — the threshold a 1.00 mg/L container meets.
- The concentrations are worked by hand below: element mass (µg) / 1000 / volume (L) = mg/L.
"""

from __future__ import annotations

import io
import re
from decimal import Decimal

import pytest
from pypdf import PdfReader

from service.chem.figures import concentration_text, percent, percent_text, significant, unit_text
from tests.conftest import Api, make_user
from tests.test_cli import sign_in

# value (mg/L) -> shown. Worked by hand: 3 significant figures, half to even, positional.
CONCENTRATIONS = [
    (0.999, "0.999"),  # below D006's 1.0 mg/L: must not read "1.0"
    (1.0, "1.00"),  # the trailing zeros are significant
    (0.0004, "0.000400"),  # zeros before the first non-zero digit are placeholders
    (139.955556, "140"),  # 139.955556 -> 140 (third figure 9, next 9: rounds up)
    (0.99951, "1.00"),
    (0.00000100, "0.00000100"),  # the smallest a record reaches: 1 µg in 1 000 L
    (7512.3, "7,510"),  # the last zero is a placeholder
    (12.25, "12.2"),  # a tie: to the even digit (ISO 80000-1 Annex B)
    (12.35, "12.4"),
    (0, "0"),
]
# value (%) -> shown: one decimal, half to even; a non-zero trace never reads as 0.
PERCENTAGES = [
    (200 / 3, "66.7"),  # 66.666…
    (100 / 3, "33.3"),
    (100, "100.0"),
    (93, "93.0"),
    (0.25, "0.2"),  # a tie: to the even digit
    (0.04, "< 0.1"),
    (0, "0.0"),
]


@pytest.mark.parametrize("value, shown", CONCENTRATIONS)
def test_concentration_three_significant_figures(value, shown):
    assert significant(value) == shown
    assert concentration_text(value) == f"{shown} mg/L"
    assert significant(Decimal(repr(value))) == shown  # a Decimal reads the same as its float


@pytest.mark.parametrize("value, shown", PERCENTAGES)
def test_percent_one_decimal(value, shown):
    assert percent(value) == shown
    assert percent_text(value) == f"{shown} %"


@pytest.mark.parametrize("value, limit, shown", [
    (0.99951, 1.0, "0.9995"),  # would read "1.00", the limit it is below
    (1.0, 1.0, "1.00"),  # at the limit it may read as the limit
    (5.0004, 5, "5.0004"),
])
def test_a_value_never_reads_as_the_limit_it_differs_from(value, limit, shown):
    assert significant(value, apart_from=limit) == shown


@pytest.mark.parametrize("value, limit, shown", [(0.49, 0.5, "0.49"), (90.004, 90, "90.004"), (0.5, 0.5, "0.5")])
def test_a_percentage_never_reads_as_the_limit_it_differs_from(value, limit, shown):
    assert percent(value, apart_from=limit) == shown


@pytest.mark.parametrize("written, one_spelling", [
    ("mg/l", "mg/L"), ("mg / l", "mg/L"), ("ml", "mL"), ("l", "L"), ("ul", "µL"), ("ug", "µg"),
    ("mg", "mg"), ("g", "g"), ("mol/l", "mol/L"), ("degC", "°C"), ("percent", "%"), ("lb", "lb"),
])
def test_one_spelling_of_each_unit(written, one_spelling):
    assert unit_text(written) == one_spelling


@pytest.mark.parametrize("value", [float("nan"), float("inf"), Decimal("NaN")])
def test_not_a_number_is_not_shown_as_one(value):
    with pytest.raises(ValueError):
        significant(value)


# --- through pages, the API and a document -----------------------------------------------------------------

# Containers whose Cd concentration is exactly the table's value: (µg Cd, volume, capacity, shown, mass shown).
# µg / 1000 / L: 1998 / 1000 / 2 = 0.999; 2000 / 1000 / 2 = 1; 4 / 1000 / 10 = 0.0004;
# 139 955 556 / 1000 / 1000 = 139.955556 (the largest volume a record takes, 1000 L).
CONTAINERS = [
    ("0.999", 1998, "2 L", "20 L", "0.999", "1.998"),
    ("1.0", 2000, "2 L", "20 L", "1.00", "2.000"),
    ("0.0004", 4, "10 L", "20 L", "0.000400", "0.004"),
    ("139.955556", 139_955_556, "1000 L", "1000 L", "140", "139,955.556"),
]


@pytest.fixture
def site(app, client):
    admin = Api(client, make_user(app, "admin@test.example", "admin", password="correct horse battery"))
    lab, place = admin.lab_and_location()
    pages = app.test_client()
    sign_in(pages, "admin@test.example", "correct horse battery")
    return {"api": admin, "lab": lab, "place": place, "pages": pages}


def _container(site, label: str, capacity: str, stream: str = "aqueous_heavy_metals") -> dict:
    return site["api"].call("POST", "/waste_containers", {"label": label, "lab_id": site["lab"],
                                                          "location_id": site["place"], "stream": stream,
                                                          "capacity": capacity}, 201)


def _manifest_text(site, ident: int) -> str:
    api = site["api"]
    response = api.client.get(f"/api/v1/waste_containers/{ident}/manifest.pdf",
                              headers={"Authorization": f"Bearer {api.token}"})
    assert response.status_code == 200
    reader = PdfReader(io.BytesIO(response.data))
    return " ".join(re.sub(r"\s+", " ", page.extract_text()) for page in reader.pages)


@pytest.mark.parametrize("label, cd_ug, volume, capacity, shown, mass_mg", CONTAINERS)
def test_concentration_on_page_api_text_and_manifest(site, label, cd_ug, volume, capacity, shown, mass_mg):
    api = site["api"]
    container = _container(site, f"C-{label}", capacity)
    api.call("POST", f"/waste_containers/{container['id']}/entries", {
        "description": "aqueous washes", "volume": volume, "elements": [{"element": "Cd", "mass": f"{cd_ug} ug"}]}, 201)
    view = api.call("GET", f"/waste_containers/{container['id']}")
    cd = next(e for e in view["elements"] if e["element"] == "Cd")
    assert cd["concentration_mg_per_l"] == pytest.approx(float(label), rel=1e-12)  # the exact value, as a number

    # the container's page and the list of containers: the mg/L cell
    page = site["pages"].get(f"/waste/{container['id']}").get_data(as_text=True)
    assert f'<td class="num">{shown}</td>' in page
    listing = site["pages"].get("/waste").get_data(as_text=True)
    assert f'<td class="num">{shown}</td>' in listing
    assert "mg/l" not in page and "mg/l" not in listing

    # API text: D006 (1.0 mg/L, 40 CFR 261.24 Table 1) fires from 1.0 on and says the value as shown
    d006 = [f for f in view["findings"] if f["rule_id"].startswith("us.tc-d006")]
    if Decimal(label) >= Decimal("1.0"):
        assert d006 and d006[0]["value_text"] == f"{shown} mg/L" and f"{shown} mg/L" in d006[0]["message"]
    else:
        assert not d006

    # the manifest: the element row reads "Cd <mass mg> <mg/L>"
    text = _manifest_text(site, container["id"])
    assert f"Cd {mass_mg} {shown} " in text, text[:2000]
    assert "mg/l" not in text


def test_percentages_on_page_api_text_and_manifest(site):
    # 20 mL acetone + 10 mL water in a 45 mL container: acetone 2/3 = 66.666… % of the liquid and the fill
    # 30/45 = 66.666… %; water 33.333… %.
    api = site["api"]
    container = _container(site, "P-1", "45 mL", stream="non_halogenated_solvent_heavy_metals")
    api.call("POST", f"/waste_containers/{container['id']}/entries", {
        "description": "acetone wash", "volume": "30 mL",
        "components": [{"substance_id": api.substance_id("acetone"), "volume": "20 mL"},
                       {"substance_id": api.substance_id("water"), "volume": "10 mL"}]}, 201)
    view = api.call("GET", f"/waste_containers/{container['id']}")
    assert view["fill_percent"] == pytest.approx(66.67)

    page = site["pages"].get(f"/waste/{container['id']}").get_data(as_text=True)
    assert "66.7 % of 45 mL" in page  # fill
    assert re.search(r'acetone</th><td class="num">66.7</td>', page) and re.search(r'water</th><td class="num">33.3</td>', page)
    shown = re.sub(r"<[^>]+>", " ", page)  # the text a person reads (a bar's CSS width may be exact)
    assert "66.66" not in shown and "66.67" not in shown

    details = " ".join(f["detail"] + " " + f["message"] for f in view["findings"])
    assert "66.66" not in details and "66.67" not in details
    assert "acetone 66.7 %" in details  # F003 (40 CFR 261.31) names the listed solvent's share

    text = _manifest_text(site, container["id"])
    assert "66.7 % of capacity" in text
    assert "acetone 66.7" in text and "water 33.3" in text
    assert "66.66" not in text and "66.67" not in text
