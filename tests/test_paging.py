"""Lists answer one page at a time with the total that match; pages link to the next and previous.

The expectations are counted independently: the test creates a known number of records and
expects that number back, split into pages of the documented size (50 by default, at most 500).
"""

from __future__ import annotations

import re

import pytest

from tests.conftest import make_user
from tests.test_cli import sign_in

N_IN_LAB = 120  # more than two default pages: 50 + 50 + 20
N_ELSEWHERE = 5


@pytest.fixture
def stocks(api):
    """120 stocks in one lab and 5 in another; yields (lab id, ids in that lab, ids elsewhere)."""
    cdo = api.substance_id("cadmium oxide")
    lab_id, place_id = api.lab_and_location()
    other = api.call("POST", "/labs", {"code": "B-202", "name": "Other group"}, 201)["id"]
    other_place = api.call("POST", "/locations", {"lab_id": other, "building": "B", "room": "B-202",
                                                  "storage": "shelf"}, 201)["id"]
    ids = [api.call("POST", "/stocks", {"label": f"P-{i:03d}", "substance_id": cdo, "lab_id": lab_id,
                                        "location_id": place_id, "amount": "1 g"}, 201)["id"] for i in range(N_IN_LAB)]
    elsewhere = [api.call("POST", "/stocks", {"label": f"Q-{i}", "substance_id": cdo, "lab_id": other,
                                              "location_id": other_place, "amount": "2 g"}, 201)["id"]
                 for i in range(N_ELSEWHERE)]
    return lab_id, ids, elsewhere


def test_a_filtered_list_pages_through_every_record_once(api, stocks):
    lab_id, ids, _ = stocks
    seen, sizes, offset = [], [], 0
    while True:
        page = api.call("GET", f"/stocks?lab_id={lab_id}&offset={offset}")
        assert (page["total"], page["limit"], page["offset"]) == (N_IN_LAB, 50, offset)
        if not page["items"]:
            break
        sizes.append(len(page["items"]))
        seen += [s["id"] for s in page["items"]]
        offset += page["limit"]
    assert sizes == [50, 50, 20]
    assert seen == sorted(ids)  # id order, each record once, none from the other lab


def test_total_counts_every_matching_record_not_the_page(api, stocks):
    page = api.call("GET", "/stocks?limit=7&offset=3")
    assert (page["total"], len(page["items"])) == (N_IN_LAB + N_ELSEWHERE, 7)
    assert api.call("GET", "/stocks?limit=500")["total"] == len(api.call("GET", "/stocks?limit=500")["items"])


@pytest.mark.parametrize(("query", "field"), [
    ("limit=501", "limit"),  # above the cap
    ("limit=0", "limit"),
    ("limit=ten", "limit"),  # not an integer
    ("limit=2.5", "limit"),
    ("offset=-1", "offset"),
])
def test_a_limit_beyond_the_cap_or_not_an_integer_is_refused_naming_it(api, query, field):
    error = api.call("GET", f"/stocks?{query}", expect=422)["error"]
    assert [d["field"] for d in error["details"]] == [field]


def test_every_list_endpoint_answers_a_capped_page(api, app):
    lists = [rule for rule in app.url_map.iter_rules() if rule.rule.startswith("/api/v1/") and "GET" in rule.methods
             and (rule.endpoint.startswith("api.list_") or rule.endpoint == "api.review_queue")]
    assert len(lists) >= 14  # 5 inventory resources, tokens, users, audit, procedures and revisions, decisions,
    # runs, containers, entries, review queue, stock movements (all and one stock's)
    lab_id, place_id = api.lab_and_location()
    container = api.call("POST", "/waste_containers", {"label": "W-1", "lab_id": lab_id, "location_id": place_id,
                                                       "stream": "aqueous_heavy_metals", "capacity": "10 L"}, 201)
    stock = api.call("POST", "/stocks", {"label": "S-1", "substance_id": api.substance_id("selenium"), "lab_id": lab_id,
                                         "location_id": place_id, "amount": "5 g"}, 201)
    for rule in lists:
        ident = stock["id"] if rule.rule.startswith("/api/v1/stocks/") else container["id"]
        path = rule.rule.removeprefix("/api/v1").replace("<int:ident>", str(ident))
        if "<" in path:
            pytest.fail(f"unexpected path argument in {rule.rule}")
        if "procedures/" in path:
            continue  # needs a procedure; the query is checked before the record is looked up (below)
        page = api.call("GET", path + "?limit=2")
        assert {"items", "total", "limit", "offset"} <= set(page) and page["limit"] == 2, rule.endpoint
        assert len(page["items"]) <= 2 and page["total"] >= len(page["items"]), rule.endpoint
    for rule in lists:
        path = rule.rule.removeprefix("/api/v1").replace("<int:ident>", "1")
        error = api.call("GET", path + "?limit=501", expect=422)["error"]
        assert [d["field"] for d in error["details"]] == ["limit"], rule.endpoint


def _shown(html: str) -> str:
    match = re.search(r"Showing (\d+)–(\d+) of (\d+)", html)
    return match.group(0) if match else ""


def test_pages_show_a_to_b_of_total_with_next_and_previous(app, client, stocks):
    make_user(app, "pager@test.example", "lab_manager")
    sign_in(client, "pager@test.example", "correct horse battery")
    total = N_IN_LAB + N_ELSEWHERE
    first = client.get("/stocks").get_data(as_text=True)
    assert _shown(first) == f"Showing 1–50 of {total}"
    assert 'rel="next"' in first and 'rel="prev"' not in first
    next_href = re.search(r'<a rel="next" href="([^"]+)"', first).group(1).replace("&amp;", "&")
    second = client.get(next_href).get_data(as_text=True)
    assert _shown(second) == f"Showing 51–100 of {total}" and 'rel="prev"' in second
    last = client.get("/stocks?offset=100").get_data(as_text=True)
    assert _shown(last) == f"Showing 101–{total} of {total}" and 'rel="next"' not in last
    assert client.get("/stocks?limit=501").status_code == 422
    overview = client.get("/").get_data(as_text=True)
    assert f"{total} stock(s)" in overview  # the real total, not the length of one page
