"""Generator category per calendar month: kg of hazardous waste generated and the category it gives.

Sources: 40 CFR 262.13 (a generator determines its category from the hazardous waste it generates
in each calendar month) and 40 CFR 260.10 definitions — very small quantity generator: ≤ 100 kg
non-acute and ≤ 1 kg acute in the month; small: > 100 kg and < 1 000 kg non-acute (and ≤ 1 kg
acute); large: ≥ 1 000 kg non-acute or > 1 kg acute (from memory — verify the wording).
Densities (g/mL, also in rules/substances.yaml): acetone 0.786 (NAS, Chemical Laboratory Safety and
Security, 2016, App. D — seen); toluene 0.866 (Prudent Practices in the Laboratory, LCSS — seen);
water 0.9982 at 20 °C (CRC Handbook — from memory — verify). Where no density is known the US
pack assumes 1 g/mL (our stated default).
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal
from pathlib import Path

import pytest

from service.rules import load_packs
from service.rules.generator import categorise
from service.rules.subjects import GeneratorMonthSubject
from service.store.db import session_scope
from service.store.models import WasteEntry
from tests.conftest import Api, make_user

RULES = Path(__file__).resolve().parents[1] / "rules"
VSQG, SQG, LQG = "very_small_quantity_generator", "small_quantity_generator", "large_quantity_generator"


@pytest.fixture(scope="module")
def packs():
    return load_packs(RULES, ["us-federal", "eu", "site-example"])


def category(packs, non_acute, acute="0"):
    return categorise(packs, [GeneratorMonthSubject("2026-03", Decimal(non_acute), Decimal(acute))])[0].category


@pytest.mark.parametrize("non_acute, acute, expected", [
    ("100", "0", VSQG),          # 260.10: ≤ 100 kg is very small
    ("100.001", "0", SQG),       # > 100 kg
    ("999.999", "0", SQG),       # < 1 000 kg
    ("1000", "0", LQG),          # ≥ 1 000 kg is large
    ("0", "1", VSQG),            # ≤ 1 kg acute
    ("0", "1.001", LQG),         # > 1 kg acute is large, whatever the non-acute amount
    ("150", "1.001", LQG),
])
def test_category_at_each_threshold(packs, non_acute, acute, expected):
    assert category(packs, non_acute, acute) == expected


def test_the_month_that_moved_it(packs):
    months = categorise(packs, [GeneratorMonthSubject(m, Decimal(kg), Decimal(0))
                                for m, kg in (("2026-01", "50"), ("2026-02", "150"), ("2026-03", "150"),
                                              ("2026-04", "1000"))])
    assert [m.category for m in months] == [VSQG, SQG, SQG, LQG]
    assert [m.moved for m in months] == [False, True, False, True]
    assert {f.rule_id for f in months[1].findings} == {"us.generator-small-quantity"}
    assert all(f.disclaimer for m in months for f in m.findings)


# ------------------------------------------------------------------ a worked month, through the API ----

def _month(at: dt.datetime) -> str:
    return f"{at.year:04d}-{at.month:02d}"


@pytest.fixture
def site(app, api):
    admin = api
    lab, place = admin.lab_and_location()  # the category counts every container of the site, wherever it is

    def container(label, stream, capacity, acute=False):
        return admin.call("POST", "/waste_containers", {"label": label, "lab_id": lab, "location_id": place,
                                                        "stream": stream, "capacity": capacity,
                                                        "acute_hazardous": acute}, 201)["id"]

    return {"admin": admin, "app": app, "acetone": admin.substance_id("acetone"),
            "toluene": admin.substance_id("toluene"), "water": admin.substance_id("water"),
            "solvent": container("G-N1", "non_halogenated_solvent_heavy_metals", "200 L"),
            "solids": container("G-S1", "contaminated_solids", "50 kg"),
            "sharps": container("G-X1", "sharps", "20 kg"),
            "acute": container("G-A1", "aqueous_heavy_metals", "5 L", acute=True)}


def _entry(site, container, **body):
    return site["admin"].call("POST", f"/waste_containers/{container}/entries", {"description": "test", **body}, 201)


def _liquid(site, container, volume, **parts):
    return _entry(site, container, volume=volume,
                  components=[{"substance_id": site[key], "volume": v} for key, v in parts.items()])


def _back_a_month(site, *entry_ids):
    with session_scope(site["app"].extensions["dotledger.sessions"]) as session:
        for ident in entry_ids:
            entry = session.get(WasteEntry, ident)
            first = entry.at.replace(day=1, hour=12, minute=0, second=0, microsecond=0)
            entry.at = first - dt.timedelta(days=15)  # the middle of the month before
    return _month(first - dt.timedelta(days=15))


def test_a_worked_month(site):
    admin = site["admin"]
    this = _month(dt.datetime.now(dt.timezone.utc))
    # This month (arithmetic written out; densities from the sources in the module docstring):
    #   100 L = 80 L acetone + 20 L toluene: 80 × 0.786 + 20 × 0.866 = 62.88 + 17.32 = 80.20 kg
    _liquid(site, site["solvent"], "100 L", acetone="80 L", toluene="20 L")
    #   30 L = 10 L acetone + 20 L not named: 10 × 0.786 + 20 × 1 (assumed) = 7.86 + 20 = 27.86 kg
    _liquid(site, site["solvent"], "30 L", acetone="10 L")
    #   5 kg of gloves and wipes
    _entry(site, site["solids"], mass="5 kg")
    #   10 kg of sharps: not a counted stream (us-federal waste_counting)
    _entry(site, site["sharps"], mass="10 kg")
    #   20 L acetone and its reversal: net 0
    wrong = _liquid(site, site["solvent"], "20 L", acetone="20 L")
    admin.call("POST", f"/waste_containers/{site['solvent']}/entries/{wrong['id']}/reverse", {"reason": "typo"}, 201)
    expected_this = Decimal("80.20") + Decimal("27.86") + Decimal("5")  # = 113.06 kg > 100 kg: small (260.10)

    # Last month: 50 L acetone = 50 × 0.786 = 39.30 kg; 10 L acetone (7.86 kg) reversed this month — the
    # reversal counts in the month of the entry it reverses: 39.30 + 7.86 − 7.86 = 39.30 kg;
    # 0.5 L water into the acute container = 0.5 × 0.9982 = 0.4991 kg acute (≤ 1 kg).
    old = _liquid(site, site["solvent"], "50 L", acetone="50 L")
    late = _liquid(site, site["solvent"], "10 L", acetone="10 L")
    acute = _liquid(site, site["acute"], "500 mL", water="500 mL")
    last = _back_a_month(site, old["id"], late["id"], acute["id"])
    admin.call("POST", f"/waste_containers/{site['solvent']}/entries/{late['id']}/reverse", {"reason": "spilt"}, 201)

    report = admin.call("GET", f"/reports/generator_category?since={last}&until={this}")
    months = {m["month"]: m for m in report["months"]}
    assert list(months) == [last, this]
    assert Decimal(str(months[this]["non_acute_kg"])) == expected_this
    assert months[this]["assumed_density_l"] == 20 and report["assumed_density_used"]
    assert months[this]["category"] == SQG and months[this]["moved"] and months[this]["previous_category"] == VSQG
    assert {f["rule_id"] for f in months[this]["findings"]} == {"us.generator-small-quantity"}
    assert Decimal(str(months[last]["non_acute_kg"])) == Decimal("39.30")
    assert Decimal(str(months[last]["acute_kg"])) == Decimal("0.4991")
    assert months[last]["category"] == VSQG and not months[last]["findings"]
    assert report["moved_in"] == [this] and report["highest_category"] == SQG
    assert report["assumed_density"] == "1 g/mL" and report["caution"]


@pytest.mark.parametrize("query, field", [("since=2026-13", "since"), ("until=26-01", "until"),
                                           ("since=2026-05&until=2026-04", ""), ("since=2000-01&until=2026-01", ""),
                                           ("month=2026-01", "month")])
def test_bad_months_are_refused(site, query, field):
    answer = site["admin"].call("GET", f"/reports/generator_category?{query}", expect=422)
    assert field in str(answer["error"])


def test_researchers_do_not_get_the_site_category(app, client):
    researcher = Api(client, make_user(app, "res@test.example", "researcher"))
    researcher.call("GET", "/reports/generator_category", expect=403)
