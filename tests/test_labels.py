"""Waste container labels: the PDF at each size, the QR code read back from the printed page by an
independent decoder (zbarimg of zbar-tools, after pdftoppm draws the page), what the label says, the
routes (token, session cookie, command line), and the refusals."""

from __future__ import annotations

import io
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner
from pypdf import PdfReader

from service.console import main
from service.documents.label import LAYOUTS, combined_hazards, label_positions
from service.store.db import session_scope
from service.store.models import WasteContainer
from tests.test_cli import sign_in
from tests.test_web_pages import demo  # noqa: F401  (the demo database and app)

MM_PER_PT = 25.4 / 72  # PDF user space: 72 points to the inch (ISO 32000-1, 8.3.2.3); 25.4 mm to the inch (exact)
# The sizes printed: (width, height) in mm and how many labels the page holds. A4 is ISO 216 (210 × 297 mm),
# US Letter 8.5 × 11 in (ANSI/ASME Y14.1); the label grids are the common sheets' (from memory).
SIZES = {"single-100x150": ((100.0, 150.0), 1), "a4-2x4": ((210.0, 297.0), 8), "letter-2x3": ((215.9, 279.4), 6)}
DECODER = shutil.which("zbarimg")
RASTER = shutil.which("pdftoppm")


def _container_id(app, label: str = "NG-W01") -> int:
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        return session.query(WasteContainer.id).filter(WasteContainer.label == label).scalar()


def _client(demo, email: str = "safety@example.org"):  # noqa: F811
    app, passwords = demo
    client = app.test_client()
    sign_in(client, email, passwords[email])
    return client


def _token(demo, email: str = "safety@example.org") -> str:  # noqa: F811
    app, passwords = demo
    response = app.test_client().post("/api/v1/auth/tokens", json={"email": email, "password": passwords[email]})
    assert response.status_code in (200, 201), response.get_json()
    return response.get_json()["token"]


def decode_qr(pdf: bytes, tmp_path: Path) -> list[str]:
    """The QR payloads on the first page, as zbarimg reads them from the page drawn at 200 dpi."""
    if not (DECODER and RASTER):
        pytest.fail("zbarimg and pdftoppm are needed (bash requirements/system.sh test installs zbar-tools and "
                    "poppler-utils)")
    source = tmp_path / "label.pdf"
    source.write_bytes(pdf)
    subprocess.run([RASTER, "-r", "200", "-png", "-singlefile", str(source), str(tmp_path / "page")], check=True)
    found = subprocess.run([DECODER, "--quiet", "--raw", str(tmp_path / "page.png")], capture_output=True, text=True)
    return [line for line in found.stdout.splitlines() if line]


@pytest.mark.parametrize("size", list(SIZES))
def test_the_label_at_each_size_and_its_qr_payload(demo, size, tmp_path):  # noqa: F811
    app, _ = demo
    ident = _container_id(app)
    response = _client(demo).get(f"/waste/{ident}/label.pdf?size={size}")
    assert response.status_code == 200 and response.mimetype == "application/pdf"
    reader = PdfReader(io.BytesIO(response.data))
    assert len(reader.pages) == 1
    (width, height), count = SIZES[size]
    box = reader.pages[0].mediabox
    assert (round(float(box.width) * MM_PER_PT, 1), round(float(box.height) * MM_PER_PT, 1)) == (width, height)
    # Every label of the page carries the QR code of the container's entry page, read back from the print.
    assert decode_qr(response.data, tmp_path) == [f"http://localhost/containers/{ident}/entry"] * count
    text = " ".join(reader.pages[0].extract_text().split())  # lines broken where the label wraps them
    view = _client(demo).get(f"/api/v1/waste_containers/{ident}",
                             headers={"Authorization": f"Bearer {_token(demo)}"}).get_json()
    assert text.count("HAZARDOUS WASTE") == count
    assert text.count(f"NG-W01 · container #{ident}") == count
    assert text.count(f"Accumulation start: {view['first_entry_at'][:10]}") == count
    assert text.count(view["stream"].replace("_", " ")) >= count
    assert response.headers["X-Document-SHA256"] in text
    assert "site safety officer" in text and "suggestions" in text


def test_the_hazards_are_the_constituents_catalogue_entries(demo, tmp_path):  # noqa: F811
    """NG-W01 holds acetone and 1-octadecene (the demo's entries). Acetone's harmonised classification
    (CLP Annex VI, index 606-001-00-8): Flam. Liq. 2 H225, Eye Irrit. 2 H319, STOT SE 3 H336, EUH066 — from
    memory; rules/substances.yaml carries the same with its source. 1-octadecene: Asp. Tox. 1 H304 (supplier
    classification, from memory)."""
    app, _ = demo
    ident = _container_id(app)
    text = " ".join(PdfReader(io.BytesIO(_client(demo).get(f"/waste/{ident}/label.pdf").data)).pages[0].extract_text().split())
    for code in ("H225", "H319", "H336", "EUH066", "H304"):
        assert code in text, code
    assert "DANGER" in text  # H225 and H304 are "Danger" categories (GHS Rev. 9, chapters 2.6 and 3.10; from memory)
    for pictogram in ("GHS02", "GHS07", "GHS08"):  # flame, exclamation mark, health hazard
        assert pictogram in text
    assert "Cd" in text and "Se" in text  # the metals entered from run 1
    assert "(suggested — for review)" in text  # no determination recorded in the demo


def test_the_api_route_takes_a_token_and_refuses_a_bad_size(demo, tmp_path):  # noqa: F811
    app, _ = demo
    ident = _container_id(app)
    client = app.test_client()
    headers = {"Authorization": f"Bearer {_token(demo)}"}
    ok = client.get(f"/api/v1/waste_containers/{ident}/label.pdf?size=a4-2x4", headers=headers)
    assert ok.status_code == 200 and ok.mimetype == "application/pdf"
    bad = client.get(f"/api/v1/waste_containers/{ident}/label.pdf?size=a3-1x1", headers=headers)
    assert bad.status_code == 422
    assert [d["field"] for d in bad.get_json()["error"]["details"]] == ["size"]
    assert client.get("/api/v1/waste_containers/99999/label.pdf", headers=headers).status_code == 404
    assert client.get(f"/api/v1/waste_containers/{ident}/label.pdf").status_code == 401  # no token


def test_the_page_route_refuses_a_bad_size_and_a_missing_container(demo):  # noqa: F811
    app, _ = demo
    client = _client(demo)
    bad = client.get(f"/waste/{_container_id(app)}/label.pdf?size=huge")
    assert bad.status_code == 422 and "text/html" in bad.content_type
    assert "<strong>size</strong>" in bad.get_data(as_text=True)
    missing = client.get("/waste/99999/label.pdf")
    assert missing.status_code == 404 and "text/html" in missing.content_type


def test_a_researcher_prints_only_their_labs_labels(demo):  # noqa: F811
    app, _ = demo
    ident = _container_id(app)
    member = _client(demo, "researcher@example.org")
    assert member.get(f"/waste/{ident}/label.pdf").status_code == 200
    from tests.conftest import make_user

    make_user(app, "outsider@test.example", "researcher")  # in no lab
    outsider = app.test_client()
    sign_in(outsider, "outsider@test.example", "correct horse battery")
    assert outsider.get(f"/waste/{ident}/label.pdf").status_code in (403, 404)


def test_public_url_sets_the_qr_address(demo, tmp_path):  # noqa: F811
    app, _ = demo
    app.config["PUBLIC_URL"] = "https://lab.example.org/dotledger/"
    ident = _container_id(app)
    pdf = _client(demo).get(f"/waste/{ident}/label.pdf").data
    assert decode_qr(pdf, tmp_path) == [f"https://lab.example.org/dotledger/containers/{ident}/entry"]


def test_the_command_line_prints_a_label(demo, tmp_path, monkeypatch):  # noqa: F811
    app, _ = demo
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", app.config["DATABASE_URL"])
    ident = _container_id(app)
    target = tmp_path / "sheet.pdf"
    done = CliRunner().invoke(main, ["print", "label", str(ident), "--size", "letter-2x3", "--output", str(target),
                                     "--base-url", "https://lab.example.org"])
    assert done.exit_code == 0, done.output
    assert decode_qr(target.read_bytes(), tmp_path) == [f"https://lab.example.org/containers/{ident}/entry"] * 6
    no_address = CliRunner().invoke(main, ["print", "label", str(ident), "--output", str(tmp_path / "x.pdf")])
    assert no_address.exit_code != 0 and "--base-url" in no_address.output
    bad_size = CliRunner().invoke(main, ["print", "label", str(ident), "--size", "b5", "--base-url",
                                         "https://lab.example.org"])
    assert bad_size.exit_code == 2 and "--size" in bad_size.output
    bad_url = CliRunner().invoke(main, ["print", "label", str(ident), "--base-url", "lab.example.org"])
    assert bad_url.exit_code == 2 and "--base-url" in bad_url.output
    missing = CliRunner().invoke(main, ["print", "label", "99999", "--base-url", "https://lab.example.org"])
    assert missing.exit_code != 0 and not (Path.cwd() / "label-99999.pdf").exists()


def test_the_sheet_layouts_fill_their_paper():
    """The common label sheets' geometry (from memory): A4 — 2 columns of 99.1 mm with a 2.5 mm gap and 4.65 mm
    side margins make 210 mm, 4 rows of 67.7 mm with 13.1 mm top and bottom make 297 mm; US Letter — 2 columns of
    4 in with a 0.1875 in gap and 0.15625 in margins make 8.5 in, 3 rows of 3 1/3 in with 0.5 in margins 11 in."""
    a4 = LAYOUTS["a4-2x4"]
    assert 2 * a4.left + 2 * a4.label_w + a4.gap_x == pytest.approx(210.0)
    assert 2 * a4.top + 4 * a4.label_h == pytest.approx(297.0)
    letter = LAYOUTS["letter-2x3"]
    assert 2 * letter.left + 2 * letter.label_w + letter.gap_x == pytest.approx(8.5 * 25.4)
    assert 2 * letter.top + 3 * letter.label_h == pytest.approx(11 * 25.4)
    corners = label_positions(a4)
    assert len(corners) == 8 and corners[-1]["top"] + a4.label_h == pytest.approx(297.0 - 13.1)
    assert all(layout.fits() for layout in LAYOUTS.values())


def test_combined_hazards_take_the_more_severe_signal_word():
    """GHS: "Danger" for the more severe categories, "Warning" for the less severe; a label shows one
    signal word (GHS Rev. 9, 1.4.10.5.2 — from memory)."""
    warning = {"substance": "a", "signal_word": "Warning", "pictograms": ["GHS07"], "h_statements": []}
    danger = {"substance": "b", "signal_word": "Danger", "pictograms": ["GHS06"], "h_statements": []}
    assert combined_hazards([warning])["signal_word"] == "Warning"
    assert combined_hazards([warning, danger])["signal_word"] == "Danger"
    assert combined_hazards([])["signal_word"] is None
