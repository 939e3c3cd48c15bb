"""Printed documents (service/documents): risk assessment and waste manifest, PDF and HTML.

Outside values, with their sources:
- Page sizes in PostScript points: A4 is 210 × 297 mm (ISO 216) = 595 × 842 pt; US Letter is
  8.5 × 11 in (ANSI/ASME Y14.1) = 612 × 792 pt (1 pt = 1/72 in).
- H-statement wording: GHS Rev. 10 Annex 3 / CLP Regulation (EC) No 1272/2008 Annex III,
  English text — written out here independently of rules/hazard-statements.yaml, from memory.
- UN 1992 "Flammable liquid, toxic, n.o.s." (memory) and UN 2570 "Cadmium compound" (seen, 49 CFR
  172.101) as published; RCRA D006 cadmium (40 CFR 261.24 Table 1, seen).
"""

from __future__ import annotations

import hashlib
import io
import re

import pytest
from click.testing import CliRunner
from pypdf import PdfReader

import service.console
from service.documents import canonical_json, data_sha256
from service.documents.render import render_html
from tests.conftest import Api, make_app, make_user

# GHS Rev. 10 Annex 3 / CLP Annex III standard English wording — from memory.
H_TEXTS = {
    "H225": "Highly flammable liquid and vapour.",
    "H304": "May be fatal if swallowed and enters airways.",
    "H330": "Fatal if inhaled.",
    "H341": "Suspected of causing genetic defects.",
    "H350": "May cause cancer.",
    "H372": "Causes damage to organs through prolonged or repeated exposure.",
    "H410": "Very toxic to aquatic life with long lasting effects.",
}
DEFERRAL = re.compile(r"local\s+regulations\s+and\s+the\s+site\s+safety\s+officer\s+decide", re.I)


def _text(pdf: bytes) -> tuple[PdfReader, list[str]]:
    reader = PdfReader(io.BytesIO(pdf))
    return reader, [re.sub(r"\s+", " ", page.extract_text()) for page in reader.pages]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo database once for the module, and an admin's API client."""
    path = tmp_path_factory.mktemp("docs") / "demo.sqlite"
    url = f"sqlite:///{path}"
    mp = pytest.MonkeyPatch()
    mp.setenv("DOTLEDGER_DATABASE_URL", url)
    result = CliRunner().invoke(service.console.main, ["demo"])
    assert result.exit_code == 0, result.output
    from service.resources import RULES_DIR

    app = make_app(url, RULES_DIR)
    api = Api(app.test_client(), make_user(app, "printer@test.example", "admin"))
    yield app, api, mp
    mp.undo()
    app.extensions["dotledger.engine"].dispose()


def _get(api: Api, path: str, expect: int = 200):
    response = api.client.get(f"/api/v1{path}", headers={"Authorization": f"Bearer {api.token}"})
    assert response.status_code == expect, (path, response.status_code, response.data[:300])
    return response


def _ids(api: Api):
    procs = {p["title"]: p["id"] for p in api.call("GET", "/procedures")["items"]}
    containers = {c["label"]: c for c in api.call("GET", "/waste_containers")["items"]}
    return procs, containers


def test_assessment_pdf_prints_masses_hazards_and_deferral(demo):
    app, api, _ = demo
    procs, _ = _ids(api)
    ident = procs["CdSe cores by hot injection"]
    view = api.call("GET", f"/procedures/{ident}")
    response = _get(api, f"/procedures/{ident}/assessment.pdf")
    assert response.mimetype == "application/pdf"
    reader, pages = _text(response.data)
    text = " ".join(pages)
    assert view["element_masses_per_batch"]
    for row in view["element_masses_per_batch"]:  # the JSON view's numbers, printed as mg
        assert f"{row['mass_ug'] / 1000:,.3f}" in text, row
    # By hand (CIAAW 2021: Cd 112.414, O 15.999, Se 78.971 g/mol): the demo draws 25.7 mg CdO at 99.99 %,
    # × 112.414 / 128.413 = 22.496 mg Cd, and 1.0 mL of the 20 mL TOP-Se, prepared from 1.5794 g Se at 99.99 %
    # (1 579.242 mg Se): 78.962 mg Se.
    assert "22.496" in text and "78.962" in text
    for code, wording in H_TEXTS.items():  # cadmium oxide, 1-octadecene, acetone use these codes
        assert f"{code} {wording}" in text, code
    for pack in view["rule_packs"]:
        assert f"{pack['pack']} {pack['version']}" in text
    assert "GHS06" in text and "GHS08" in text  # cadmium oxide: toxic, health hazard (CLP Annex VI, memory)
    assert "Face shield" in text and "Sealed rotor" in text  # hot injection, centrifuge → controls.yaml
    assert DEFERRAL.search(text)
    assert "Safety officer" in text and "Supervisor" in text
    digest = response.headers["X-Document-SHA256"]
    assert re.fullmatch(r"[0-9a-f]{64}", digest)
    assert all(digest in page for page in pages)  # printed in the footer of every page
    assert all(f"of {len(reader.pages)}" in page for page in pages)


def test_manifest_pdf_codes_transport_and_hash(demo):
    app, api, _ = demo
    _, containers = _ids(api)
    container = containers["NG-W01"]  # acetone washes carrying Cd (demo)
    response = _get(api, f"/waste_containers/{container['id']}/manifest.pdf")
    _, pages = _text(response.data)
    text = " ".join(pages)
    cd = next(e for e in container["elements"] if e["element"] == "Cd")
    assert cd["concentration_mg_per_l"] == pytest.approx(6.298 / 0.045)
    # By hand: the demo run's 22 496 µg Cd, 22 % and 6 % of it (rounded down, the demo's invented split)
    # into the two supernatants: 4949 + 1349 = 6298 µg = 6.298 mg in 25 + 20 mL; 6.298 mg / 0.045 L =
    # 139.955… mg/L, printed to 3 significant figures (tests/test_number_formats.py): 140.
    assert "Cd 6.298 140 " in text
    assert "D006" in text  # RCRA toxicity characteristic, cadmium (40 CFR 261.24)
    assert "UN 1992" in text and "UN 1090" in text  # UN Model Regulations / 49 CFR 172.101 (UN 1090 seen, UN 1992 from memory)
    assert "UN 2570" not in text  # a solids entry; this is a liquid container
    assert "suggested, for review" in text.lower()
    assert "licensed shipper" in text and DEFERRAL.search(text)
    html = _get(api, f"/waste_containers/{container['id']}/manifest.html")
    assert html.mimetype == "text/html"
    assert html.headers["X-Document-SHA256"] in html.get_data(as_text=True)


# SHA-256 test vector: FIPS 180-2, Appendix B.1 (the one-block message "abc"), seen.
SHA256_ABC = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_sha256_of_the_fips_example():
    # hashlib is the independent implementation the expectations below use; check it first.
    assert hashlib.sha256(b"abc").hexdigest() == SHA256_ABC


def test_canonical_json_bytes_written_out_by_hand():
    data = {"z": {"\u03b2": [1, 2.5, None], "a": True}, "mass": "22.496 mg", "\u00b5": "\u00b5g", "element": "Cd"}
    # Keys sorted by code point at every level ("µ" U+00B5 after "z"; "β" U+03B2 after "a"), no spaces,
    # UTF-8 without escapes: µ = C2 B5, β = CE B2 (Unicode / RFC 3629).
    expected = (b'{"element":"Cd","mass":"22.496 mg","z":{"a":true,"\xce\xb2":[1,2.5,null]},'
                b'"\xc2\xb5":"\xc2\xb5g"}')
    assert canonical_json(data) == expected
    assert data_sha256(data) == hashlib.sha256(expected).hexdigest()
    with pytest.raises(ValueError):  # NaN has no JSON form; it is refused, not written as NaN
        canonical_json({"x": float("nan")})


# A waste manifest's data, small enough to write its canonical bytes out by hand.
MANIFEST_DATA = {
    "site": "Institut f\u00fcr Nanokristalle", "page_size": "A4", "generated_at": "2026-01-02 03:04:05 UTC",
    "document_id": "WM-00001", "lab": {"code": "C-214", "name": "Colloids"}, "location": {},
    "container": {"id": 1, "label": "W-1", "stream": "aqueous_heavy_metals", "form": "liquid", "capacity": "10 L",
                  "acute_hazardous": False, "volume_l": 0, "fill_percent": 0, "filterable_solids_percent": 0,
                  "state": "open", "first_entry_at": None, "full_at": None, "pickup_requested_at": None,
                  "collected_at": None, "concentration_note": "Empty."},
    "stream_title": "Aqueous", "deferral": "Defer.", "caution": "Careful.", "transport_version": "t1",
    "rule_packs": [], "constituents": [], "elements": [], "suggested_codes": [], "transport": [],
    "metals_present": [], "hazards": [], "findings": [], "entries": [], "sign_off": ["Safety officer"],
}
MANIFEST_BYTES = (
    b'{"caution":"Careful.","constituents":[],'
    b'"container":{"acute_hazardous":false,"capacity":"10 L","collected_at":null,'
    b'"concentration_note":"Empty.","fill_percent":0,'
    b'"filterable_solids_percent":0,"first_entry_at":null,"form":"liquid","full_at":null,"id":1,"label":"W-1",'
    b'"pickup_requested_at":null,"state":"open","stream":"aqueous_heavy_metals","volume_l":0},'
    b'"deferral":"Defer.","document_id":"WM-00001","elements":[],"entries":[],"findings":[],'
    b'"generated_at":"2026-01-02 03:04:05 UTC","hazards":[],"lab":{"code":"C-214","name":"Colloids"},'
    b'"location":{},"metals_present":[],"page_size":"A4","rule_packs":[],"sign_off":["Safety officer"],'
    b'"site":"Institut f\xc3\xbcr Nanokristalle","stream_title":"Aqueous","suggested_codes":[],"transport":[],'
    b'"transport_version":"t1"}'
)


def test_document_hash_is_sha256_of_its_data_written_out_by_hand():
    doc = render_html("manifest.html", MANIFEST_DATA, document_id="WM-00001", filename="manifest-1")
    assert doc.sha256 == hashlib.sha256(MANIFEST_BYTES).hexdigest()
    assert doc.sha256 in doc.html  # the footer prints the same hash the header carries


def test_researcher_of_another_lab_is_refused(demo):
    app, api, _ = demo
    procs, containers = _ids(api)
    other = api.call("POST", "/labs", {"code": "Z-9", "name": "Elsewhere"}, 201)["id"]
    outsider = api.as_(make_user(app, "outsider@test.example", "researcher", lab_ids=[other]))
    _get(outsider, f"/procedures/{procs['CdSe cores by hot injection']}/assessment.html", expect=403)
    _get(outsider, f"/waste_containers/{containers['NG-W01']['id']}/manifest.pdf", expect=403)


@pytest.mark.parametrize("size, mediabox", [("A4", (595, 842)), ("Letter", (612, 792))])  # ISO 216 / ANSI
def test_page_size_setting(demo, size, mediabox):
    app, api, _ = demo
    _, containers = _ids(api)
    app.config["PAGE_SIZE"] = size
    try:
        response = _get(api, f"/waste_containers/{containers['NG-W04']['id']}/manifest.pdf")
    finally:
        app.config["PAGE_SIZE"] = "A4"
    box = PdfReader(io.BytesIO(response.data)).pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == mediabox


def _big_procedure(api: Api, title: str) -> int:
    lab, place = api.lab_and_location()
    oleic = api.substance_id("oleic acid")
    stocks = [api.call("POST", "/stocks", {"label": f"BIG-{i:02d}", "substance_id": oleic, "lab_id": lab,
                                           "location_id": place, "amount": "500 mL"}, 201)["id"] for i in range(60)]
    body = {"lab_id": lab, "title": title,
            "steps": [{"operation": "heat", "temperature_c": 100 + i, "atmosphere": "argon", "note": f"stage note {i:02d}"}
                      for i in range(40)],
            "draws": [{"stock_id": s, "amount": "1 mL"} for s in stocks], "waste_plan": []}
    return api.call("POST", "/procedures", body, 201)["id"]


def test_long_procedure_paginates_with_repeated_headers_and_escapes(demo):
    app, api, _ = demo
    ident = _big_procedure(api, "<script>alert(1)</script> big batch")
    html = _get(api, f"/procedures/{ident}/assessment.html").get_data(as_text=True)
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt; big batch" in html
    _, pages = _text(_get(api, f"/procedures/{ident}/assessment.pdf").data)
    assert len(pages) > 1
    with_rows = [i for i, page in enumerate(pages) if re.search(r"BIG-\d\d", page)]
    assert len(with_rows) > 1  # the substances table runs over more than one page
    assert all("Stock / mixture" in pages[i] for i in with_rows)  # its header row repeats on each
    with_steps = [i for i, page in enumerate(pages) if re.search(r"stage note \d\d", page)]
    assert len(with_steps) > 1 and all("Atmosphere" in pages[i] for i in with_steps)


def test_cli_print_writes_pdf_and_hash(demo, tmp_path):
    app, api, _ = demo
    procs, _ = _ids(api)
    target = tmp_path / "ra.pdf"
    result = CliRunner().invoke(service.console.main, ["print", "assessment", str(procs["CdSe/ZnS core-shell growth"]),
                                                       "--output", str(target)])
    assert result.exit_code == 0, result.output
    digest = re.search(r"SHA-256 ([0-9a-f]{64})", result.output).group(1)
    assert str(target) in result.output
    assert digest in _text(target.read_bytes())[1][0]
    missing = CliRunner().invoke(service.console.main, ["print", "manifest", "99999"])
    assert missing.exit_code != 0


@pytest.mark.parametrize("title, state", [("CsPbBr3 perovskite nanocrystals", "draft"),
                                          ("CdSe/ZnS core-shell growth", "submitted")])
def test_an_assessment_not_approved_is_marked_draft_on_every_page(demo, title, state):
    app, api, _ = demo
    procs, _ = _ids(api)
    assert api.call("GET", f"/procedures/{procs[title]}")["state"] == state  # the demo scenario's states
    _, pages = _text(_get(api, f"/procedures/{procs[title]}/assessment.pdf").data)
    assert f"DRAFT — not approved (state: {state})" in pages[0]
    assert all("DRAFT" in page for page in pages)  # the running head and the mark across the page
    assert "Approved " not in " ".join(pages)


def test_an_approved_assessment_names_the_date_and_the_decider(demo):
    app, api, _ = demo
    procs, _ = _ids(api)
    ident = procs["CdSe cores by hot injection"]
    view = api.call("GET", f"/procedures/{ident}")
    decider = next(u for u in api.call("GET", "/users?limit=100")["items"] if u["id"] == view["decided_by_id"])
    _, pages = _text(_get(api, f"/procedures/{ident}/assessment.pdf").data)
    text = " ".join(pages)
    assert f"Approved {view['decided_at'][:10]} by {decider['display_name']}" in text
    assert "DRAFT" not in text


def test_steps_and_substances_are_numbered_from_one(demo):
    app, api, _ = demo
    procs, _ = _ids(api)
    ident = procs["CdSe cores by hot injection"]
    view = api.call("GET", f"/procedures/{ident}")
    assert view["steps"][0]["position"] == 0  # stored from 0; people count from 1
    html = _get(api, f"/procedures/{ident}/assessment.html").get_data(as_text=True)
    steps = html.split("2. Procedure steps", 1)[1].split("3. Substances", 1)[0]
    numbers = re.findall(r'<tr><td class="num">(\d+)</td>', steps)
    assert numbers == [str(i) for i in range(1, len(view["steps"]) + 1)]
    substances = html.split("3. Substances", 1)[1].split("Element masses per batch", 1)[0]
    assert re.findall(r'<tr><td class="num">(\d+)</td>', substances)[:2] == ["1", "2"]
    _, pages = _text(_get(api, f"/procedures/{ident}/assessment.pdf").data)
    first_step = view["steps"][0]["operation"]
    assert re.search(rf"Note 1 {first_step}\b", " ".join(pages)), "the first step row reads 1 <operation>"
