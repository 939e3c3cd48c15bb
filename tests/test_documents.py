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
    "rule_packs": [], "constituents": [], "elements": [], "metals_present": [], "hazards": [], "findings": [],
    "entries": [], "sign_off": ["Safety officer"],
    "codes": {"status": "Not confirmed.", "confirmed": [], "by": None, "at": None, "comment": None, "for_review": []},
    "transport": {"rule": "r", "chosen": None, "not_chosen": []},
    "shipment": {"transporter": None, "receiving_facility": None, "container_count": None, "container_type": None},
}
MANIFEST_BYTES = (
    b'{"caution":"Careful.","codes":{"at":null,"by":null,"comment":null,"confirmed":[],"for_review":[],'
    b'"status":"Not confirmed."},"constituents":[],'
    b'"container":{"acute_hazardous":false,"capacity":"10 L","collected_at":null,'
    b'"concentration_note":"Empty.","fill_percent":0,'
    b'"filterable_solids_percent":0,"first_entry_at":null,"form":"liquid","full_at":null,"id":1,"label":"W-1",'
    b'"pickup_requested_at":null,"state":"open","stream":"aqueous_heavy_metals","volume_l":0},'
    b'"deferral":"Defer.","document_id":"WM-00001","elements":[],"entries":[],"findings":[],'
    b'"generated_at":"2026-01-02 03:04:05 UTC","hazards":[],"lab":{"code":"C-214","name":"Colloids"},'
    b'"location":{},"metals_present":[],"page_size":"A4","rule_packs":[],'
    b'"shipment":{"container_count":null,"container_type":null,"receiving_facility":null,"transporter":null},'
    b'"sign_off":["Safety officer"],"site":"Institut f\xc3\xbcr Nanokristalle","stream_title":"Aqueous",'
    b'"transport":{"chosen":null,"not_chosen":[],"rule":"r"},"transport_version":"t1"}'
)


def test_document_hash_is_sha256_of_its_data_written_out_by_hand():
    doc = render_html("manifest.html", MANIFEST_DATA, document_id="WM-00001", filename="manifest-1")
    assert doc.sha256 == hashlib.sha256(MANIFEST_BYTES).hexdigest()
    assert doc.sha256 in doc.html  # the footer prints the same hash the header carries


def test_compiled_templates_kept_between_processes_render_the_same(tmp_path, monkeypatch):
    # The documents' templates are compiled once and kept (Jinja's bytecode cache): a template read back from
    # the cache renders what a freshly compiled one renders, an edited template is compiled afresh, and a
    # cache folder that cannot be written costs only the time.
    import service.documents.render as render

    def environment(folder, cache):
        monkeypatch.setattr(render, "TEMPLATES", folder)
        monkeypatch.setattr(render, "_compiled_templates", lambda: cache)
        return render._environment()

    fresh = environment(render.TEMPLATES, None).get_template("manifest.html").render(
        doc=MANIFEST_DATA, sha256="0" * 64, page_size=None, stylesheet="")
    cache = render._CompiledTemplates(str(tmp_path))
    for reading in (False, True):  # the first compiles and writes the cache, the second only reads it
        env = environment(render.TEMPLATES, cache)
        if reading:
            env.compile = None  # Jinja calls it only for a template it did not find in the cache
        kept = env.get_template("manifest.html")
        assert kept.render(doc=MANIFEST_DATA, sha256="0" * 64, page_size=None, stylesheet="") == fresh
    assert len(list(tmp_path.glob("__jinja2_*.cache"))) >= 2  # manifest.html and the templates it extends

    own = tmp_path / "own"
    own.mkdir()
    (own / "t.html").write_text("one {{ x }}", encoding="utf-8")
    assert environment(own, cache).get_template("t.html").render(x=1) == "one 1"
    (own / "t.html").write_text("two {{ x }}", encoding="utf-8")
    assert environment(own, cache).get_template("t.html").render(x=1) == "two 1"

    unwritable = render._CompiledTemplates(str(tmp_path / "no-such-folder"))
    assert environment(own, unwritable).get_template("t.html").render(x=2) == "two 2"


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


def _decided_procedure(app, api: Api, title: str, action: str) -> int:
    """A procedure of the demo lab submitted by the admin and sent back or declined by a safety officer."""
    lab = api.call("GET", "/labs")["items"][0]["id"]
    place = next(p["id"] for p in api.call("GET", "/locations?limit=100")["items"] if p["lab_id"] == lab)
    stock = api.call("POST", "/stocks", {"label": f"OA-{action}", "substance_id": api.substance_id("oleic acid"),
                                         "lab_id": lab, "location_id": place, "amount": "100 mL"}, 201)["id"]
    ident = api.call("POST", "/procedures", {"lab_id": lab, "title": title, "waste_plan": [],
                                             "steps": [{"operation": "heat", "temperature_c": 120, "atmosphere": "argon"}],
                                             "draws": [{"stock_id": stock, "amount": "1 mL"}]}, 201)["id"]
    api.call("POST", f"/procedures/{ident}/submit", {})
    officer = api.as_(make_user(app, f"officer-{action}@test.example", "safety_officer"))
    officer.call("POST", f"/procedures/{ident}/{action}", {"comment": "Not as written."})
    return ident


@pytest.mark.parametrize("title, state, action, line", [
    ("CsPbBr3 perovskite nanocrystals", "draft", None, "DRAFT — not approved (state: draft)"),
    ("CdSe/ZnS core-shell growth", "submitted", None,
     "NOT APPROVED — submitted, awaiting the safety officer (state: submitted)"),
    ("Sent back for changes", "changes_requested", "request_changes", "NOT APPROVED — changes requested "),
    ("Declined batch", "declined", "decline", "NOT APPROVED — declined "),
])
def test_an_assessment_not_approved_is_marked_on_every_page(demo, title, state, action, line):
    app, api, _ = demo
    ident = _decided_procedure(app, api, title, action) if action else _ids(api)[0][title]
    assert api.call("GET", f"/procedures/{ident}")["state"] == state  # the demo scenario's states, or made here
    _, pages = _text(_get(api, f"/procedures/{ident}/assessment.pdf").data)
    assert line in pages[0] and f"(state: {state})" in pages[0]
    marker = "DRAFT" if state == "draft" else "NOT APPROVED"
    assert all(marker in page for page in pages)  # the running head and the mark across the page
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


# --- the manifest: confirmed codes, one transport entry, shipment fields, reversed entries ---------------
# 49 CFR 172.101 Hazardous Materials Table, column 2 (proper shipping name) and column 3 (hazard class), written
# out here independently of rules/transport-suggestions.yaml. Status as in the project's reference list:
# UN1090, UN2570, UN3283 seen; UN1993, UN2929, UN3077, UN3082 from a secondary copy; UN1992, UN1888, UN3440 from
# memory. A proper shipping name may be used in the singular or plural (172.101(c)(1); secondary copy).
CFR_172_101 = {
    "UN 1090": ("Acetone", "3"),
    "UN 1888": ("Chloroform", "6.1"),
    "UN 1992": ("Flammable liquids, toxic, n.o.s.", "3"),
    "UN 1993": ("Flammable liquids, n.o.s.", "3"),
    "UN 2570": ("Cadmium compounds", "6.1"),
    "UN 2929": ("Toxic liquids, flammable, organic, n.o.s.", "6.1"),
    "UN 3077": ("Environmentally hazardous substances, solid, n.o.s.", "9"),
    "UN 3082": ("Environmentally hazardous substances, liquid, n.o.s.", "9"),
    "UN 3283": ("Selenium compound, solid, n.o.s.", "6.1"),
    "UN 3440": ("Selenium compound, liquid, n.o.s.", "6.1"),
}


def _same_name(printed: str, regulation: str) -> bool:
    """Whether ``printed`` starts with the regulation's proper shipping name, singular or plural, any case."""
    words, theirs = printed.lower().split(), regulation.lower().split()
    if len(words) < len(theirs):
        return False
    for i, (mine, reg) in enumerate(zip(words, theirs)):
        if i == len(theirs) - 1:  # the name's last word: what follows it in print is the class, after a comma
            mine = mine.removesuffix(",")
        stem, trail = reg.rstrip(","), "," if reg.endswith(",") else ""
        if mine not in {stem + trail, stem.removesuffix("s") + trail, stem + "s" + trail}:
            return False
    return True


def test_every_suggested_un_entry_carries_its_49_cfr_172_101_name_and_class(rules_dir):
    from service.documents.controls import load_transport

    candidates = [c for s in load_transport(str(rules_dir)).streams for c in s.candidates]
    assert {c.un for c in candidates} <= set(CFR_172_101)
    for c in candidates:
        name, hazard_class = CFR_172_101[c.un]
        assert _same_name(c.description, name), (c.un, c.description, name)
        assert f", {hazard_class}" in c.description, (c.un, c.description)  # the class follows the name


@pytest.mark.parametrize("stream, elements, components, expected", [
    # hand-chosen cases: a named toxic constituent outranks the generic n.o.s. entry
    ("non_halogenated_solvent_heavy_metals", {"Cd"}, {"acetone"}, "UN 1992"),
    ("non_halogenated_solvent_heavy_metals", set(), {"acetone"}, "UN 1090"),
    ("non_halogenated_solvent_heavy_metals", {"Zn"}, {"hexane"}, "UN 1993"),  # zinc is not in UN 1992's list
    ("halogenated_solvent_heavy_metals", {"Cd"}, {"chloroform"}, "UN 1888"),
    ("halogenated_solvent_heavy_metals", {"Cd"}, set(), "UN 2929"),
    ("aqueous_heavy_metals", {"Se"}, set(), "UN 3440"),
    ("aqueous_heavy_metals", {"Cd"}, set(), "UN 3082"),
    ("contaminated_solids", {"Cd", "Se"}, set(), "UN 2570"),
    ("contaminated_solids", {"Se"}, set(), "UN 3283"),
    ("contaminated_solids", {"Pb"}, set(), "UN 3077"),
    ("sharps", {"Cd"}, set(), None),
])
def test_one_transport_entry_is_chosen_and_the_others_say_why_not(rules_dir, stream, elements, components, expected):
    from service.documents.controls import load_transport, transport_choice

    transport = load_transport(str(rules_dir))
    choice = transport_choice(transport, stream, elements, components)
    assert (choice["chosen"] or {}).get("un") == expected
    entry = next(s for s in transport.streams if s.stream == stream)
    assert len(choice["not_chosen"]) == len(entry.candidates) - (expected is not None)
    for other in choice["not_chosen"]:
        assert other["why_not"].startswith(("its conditions are not met", f"its conditions are met, but {expected}"))


def test_two_candidates_of_one_priority_are_refused_at_load(tmp_path, rules_dir):
    from service.datafiles import DataFileError
    from service.documents.controls import load_transport

    text = (rules_dir / "transport-suggestions.yaml").read_text(encoding="utf-8")
    (tmp_path / "transport-suggestions.yaml").write_text(text.replace("priority: 20", "priority: 30", 1), encoding="utf-8")
    with pytest.raises(DataFileError, match="share a priority"):
        load_transport(str(tmp_path))


def _manifest_text(api: Api, ident: int, query: str = "") -> str:
    return " ".join(_text(_get(api, f"/waste_containers/{ident}/manifest.pdf{query}").data)[1])


def test_manifest_prints_confirmed_codes_as_confirmed_and_the_rest_for_review(demo):
    app, api, _ = demo
    _, containers = _ids(api)
    container = containers["NG-W01"]  # acetone washes carrying Cd (demo)
    before = _manifest_text(api, container["id"])
    assert "NOT CONFIRMED — no determination recorded" in before
    assert "D006 suggested" in before and "D006 confirmed" not in before
    officer = api.as_(make_user(app, "officer-codes@test.example", "safety_officer"))
    body = {"codes": [{"system": "RCRA", "code": "D006", "description": "toxicity characteristic, cadmium"}],
            "comment": "TC cadmium confirmed from the entries."}
    determination = officer.call("POST", f"/waste_containers/{container['id']}/determination", body, 201)["determination"]
    text = _manifest_text(api, container["id"])
    who, when = determination["by"]["name"], determination["at"][:16].replace("T", " ")
    assert f"Confirmed by {who} on {when} UTC" in text
    assert "D006 confirmed" in text and "D006 suggested" not in text  # 40 CFR 261.24 Table 1, cadmium
    assert "TC cadmium confirmed from the entries." in text
    suggested = {f["suggested_code"]["code"] for f in container["findings"] if f.get("suggested_code")} - {"D006"}
    assert suggested  # the demo container also has D001 / F003 suggestions (acetone)
    assert all(f"{code} suggested" in text for code in suggested)
    assert "suggested, for review" in text.lower()


def test_manifest_suggests_one_un_entry_with_its_reason(demo):
    app, api, _ = demo
    _, containers = _ids(api)
    text = _manifest_text(api, containers["NG-W01"]["id"])
    transport = text.split("4. Transport description")[1].split("5. Hazards")[0]
    # Cd in acetone: UN 1992 chosen (heavy metals make the liquid toxic); UN 1090 and UN 1993 not chosen.
    chosen = transport.split("Entries not chosen")[0]
    assert "UN 1992" in chosen and "UN 1090" not in chosen and "UN 1993" not in chosen
    name, hazard_class = CFR_172_101["UN 1992"]
    printed = chosen.split("Description", 1)[1].strip()
    assert _same_name(printed, name) and f", {hazard_class}" in printed  # 49 CFR 172.101 (from memory)
    assert "Heavy metals present" in chosen and "highest priority" in chosen
    others = transport.split("Entries not chosen")[1]
    assert re.search(r"UN 1090 .*not chosen: its conditions are met, but UN 1992 ranks higher", others)
    assert re.search(r"UN 1993 .*not chosen: its conditions are met, but UN 1992 ranks higher", others)


SHIPMENT = {"transporter": "Rivergate Hazmat Haulage", "receiving_facility": "Eastbank Treatment Works, Dock 4",
            "container_count": 2, "container_type": "20 L HDPE jerrican"}


def test_manifest_prints_the_shipment_or_lines_to_fill(demo):
    from urllib.parse import urlencode

    app, api, _ = demo
    _, containers = _ids(api)
    ident = containers["NG-W01"]["id"]
    filled = _manifest_text(api, ident, "?" + urlencode(SHIPMENT))
    shipment = filled.split("Shipment", 1)[1].split("2. Constituents")[0]
    for label, key in (("Transporter", "transporter"), ("Receiving facility", "receiving_facility"),
                       ("Number of containers", "container_count"), ("Container type", "container_type")):
        assert f"{label} {SHIPMENT[key]}" in shipment
    blank = _manifest_text(api, ident).split("Shipment", 1)[1].split("2. Constituents")[0]
    assert blank.strip().startswith("Transporter Receiving facility Number of containers Container type")
    html = _get(api, f"/waste_containers/{ident}/manifest.html").get_data(as_text=True)
    assert html.count('class="fill') == 4  # four lines to fill by hand
    assert "Receiving facility" in " ".join(_text(_get(api, f"/waste_containers/{ident}/manifest.pdf").data)[1][-1:])


@pytest.mark.parametrize("query, field", [
    ({"transporter": "x" * 201}, "transporter"), ({"receiving_facility": "y" * 301}, "receiving_facility"),
    ({"container_type": "z" * 81}, "container_type"), ({"container_count": 0}, "container_count"),
    ({"container_count": 1000}, "container_count"), ({"container_count": "two"}, "container_count"),
    ({"carrier": "x"}, "carrier"),
])
def test_shipment_fields_out_of_bounds_are_refused_naming_them(demo, query, field):
    from urllib.parse import urlencode

    app, api, _ = demo
    _, containers = _ids(api)
    response = _get(api, f"/waste_containers/{containers['NG-W01']['id']}/manifest.pdf?{urlencode(query)}", expect=422)
    assert response.get_json()["error"]["details"][0]["field"] == field


def test_shipment_at_its_bounds_is_printed(demo):
    from urllib.parse import urlencode

    app, api, _ = demo
    _, containers = _ids(api)
    query = {"transporter": "T" * 200, "container_count": 999, "container_type": "c" * 80}
    html = _get(api, f"/waste_containers/{containers['NG-W01']['id']}/manifest.html?{urlencode(query)}").get_data(as_text=True)
    assert "T" * 200 in html and ">999<" in html and "c" * 80 in html


def test_cli_print_manifest_takes_the_shipment(demo, tmp_path):
    app, api, _ = demo
    _, containers = _ids(api)
    target = tmp_path / "wm.pdf"
    args = ["print", "manifest", str(containers["NG-W01"]["id"]), "--output", str(target),
            "--transporter", SHIPMENT["transporter"], "--receiving-facility", SHIPMENT["receiving_facility"],
            "--container-count", "2", "--container-type", SHIPMENT["container_type"]]
    result = CliRunner().invoke(service.console.main, args)
    assert result.exit_code == 0, result.output
    text = " ".join(_text(target.read_bytes())[1])
    assert f"Transporter {SHIPMENT['transporter']}" in text and "Number of containers 2" in text
    refused = CliRunner().invoke(service.console.main, [*args[:5], "--container-count", "0"])
    assert refused.exit_code != 0 and "--container-count" in refused.output


def test_reversed_entries_print_as_reversed(demo):
    app, api, _ = demo
    _, containers = _ids(api)
    ident = containers["NG-W04"]["id"]
    view = api.call("GET", f"/waste_containers/{ident}")
    body = ({"description": "wipes, mistaken entry", "mass": "10 g"} if view["form"] == "solid"
            else {"description": "rinse, mistaken entry", "volume": "5 mL"})
    wrong = api.call("POST", f"/waste_containers/{ident}/entries", body, 201)
    reversal = api.call("POST", f"/waste_containers/{ident}/entries/{wrong['id']}/reverse", {"reason": "wrong container"}, 201)
    text = _manifest_text(api, ident)
    assert f"REVERSED by entry {reversal['id']}" in text and f"Reversal of entry {wrong['id']}" in text
    html = _get(api, f"/waste_containers/{ident}/manifest.html").get_data(as_text=True)
    row = re.search(rf'<tr class="reversed"><td class="num">{wrong["id"]}</td>', html)
    assert row, "the reversed entry's row is struck through"
    assert html.count('<tr class="reversed">') == 1  # the reversal itself is not struck through
