"""The site's name lives in the database: set by `init --site-name` or the demo, shown on pages
and printed documents without any environment variable."""

from __future__ import annotations

import io
import re

import pytest
from click.testing import CliRunner
from pypdf import PdfReader

from service.console import main  # the console script: the command line with `print` wired in
from service.errors import InvalidInput
from service.store.db import session_scope
from service.store.site import NAME_MAX_LENGTH, UNNAMED, set_site_name, site_name


def _pdf_text(path) -> str:
    return " ".join(re.sub(r"\s+", " ", page.extract_text()) for page in PdfReader(io.BytesIO(path.read_bytes())).pages)


def test_name_is_stored_and_kept(app):
    sessions = app.extensions["dotledger.sessions"]
    with session_scope(sessions) as session:
        assert site_name(session) == UNNAMED
        assert set_site_name(session, "  Harbour   Road\tCampus ") is True
    with session_scope(sessions) as session:
        assert site_name(session) == "Harbour Road Campus"  # white space folded
        assert set_site_name(session, "Another name", only_if_unnamed=True) is False
        assert set_site_name(session, "Harbour Road Campus") is False  # unchanged
        assert set_site_name(session, "East Campus") is True
    with session_scope(sessions) as session:
        assert site_name(session) == "East Campus"


@pytest.mark.parametrize("bad", ["", "   ", "x" * (NAME_MAX_LENGTH + 1)])
def test_empty_or_overlong_name_is_refused(app, bad):
    with session_scope(app.extensions["dotledger.sessions"]) as session:
        with pytest.raises(InvalidInput) as caught:
            set_site_name(session, bad)
    assert caught.value.field == "site_name"


def test_demo_names_its_site_on_documents_without_environment(sqlite_url, monkeypatch, tmp_path):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    monkeypatch.delenv("DOTLEDGER_SITE_NAME", raising=False)
    runner = CliRunner()
    assert runner.invoke(main, ["demo"]).exit_code == 0
    target = tmp_path / "ra.pdf"
    result = runner.invoke(main, ["print", "assessment", "1", "--output", str(target)])
    assert result.exit_code == 0, result.output
    assert "Northgate Institute of Materials" in _pdf_text(target)


def test_init_names_the_site_and_the_demo_keeps_it(sqlite_url, monkeypatch, tmp_path):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    first = runner.invoke(main, ["init"])
    assert first.exit_code == 0 and f"site: {UNNAMED}" in first.output and "--site-name" in first.output
    named = runner.invoke(main, ["init", "--site-name", "Harbour Road Campus"])
    assert named.exit_code == 0 and "site: Harbour Road Campus" in named.output
    assert runner.invoke(main, ["demo"]).exit_code == 0
    target = tmp_path / "wm.pdf"
    assert runner.invoke(main, ["print", "manifest", "1", "--output", str(target)]).exit_code == 0
    text = _pdf_text(target)
    assert "Harbour Road Campus" in text and "Northgate" not in text
    refused = runner.invoke(main, ["init", "--site-name", " "])
    assert refused.exit_code != 0 and "site_name" in refused.output


def test_pages_show_the_stored_name(sqlite_url, monkeypatch):
    from service.app import create_app

    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    assert CliRunner().invoke(main, ["init", "--site-name", "Harbour Road Campus"]).exit_code == 0
    page = create_app({"DATABASE_URL": sqlite_url}).test_client().get("/login").get_data(as_text=True)
    assert "Harbour Road Campus" in page
