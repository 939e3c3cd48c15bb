"""The inventory spreadsheet import by upload: a dry run's row-by-row report first, then the real run.

The uploaded file is kept on the server between the two steps, in ``<instance>/imports/`` under a
random name: at most ``importer.MAX_UPLOAD_BYTES``, for ``HOLD_SECONDS``, and only for the signed-in
session that sent it (its token is kept in the signed session cookie, never a path from the client).
The real run imports every row or, when rows are rejected, nothing unless the person asks for the
accepted rows alone (``importer.import_inventory``, the rule the API and the CLI follow too).
"""

from __future__ import annotations

import re
import secrets
import time
from pathlib import Path
from typing import Optional

from flask import current_app, render_template, request, session as cookie

from service.appdata import catalogue
from service.auth import current_user
from service.errors import InvalidInput
from service.present.imports import dump_report
from service.store.db import get_session
from service.store.importer import (
    MAX_UPLOAD_BYTES,
    MAX_UPLOAD_ROWS,
    OPTIONAL_COLUMNS,
    REQUIRED_COLUMNS,
    SUFFIXES,
    import_inventory,
    lookup_in,
    read_upload,
)
from service.web import bp

HOLD_SECONDS = 3600  # an uploaded file waits this long for its real run
HELD_PER_SESSION = 5  # files one session may have waiting; the oldest goes first
_TOKEN = re.compile(r"^[A-Za-z0-9_-]{32}$")


def _folder() -> Path:
    folder = Path(current_app.instance_path) / "imports"
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def _prune(folder: Path) -> None:
    """Remove held files older than HOLD_SECONDS (whoever sent them)."""
    limit = time.time() - HOLD_SECONDS
    for path in folder.glob("*"):
        if path.is_file() and path.stat().st_mtime < limit:
            path.unlink(missing_ok=True)


def _hold(filename: str, data: bytes) -> str:
    """Keep the file under a random name; its token joins the session's held files."""
    folder = _folder()
    _prune(folder)
    token = secrets.token_urlsafe(24)  # 32 characters
    (folder / f"{token}{Path(filename).suffix.lower()}").write_bytes(data)
    held = [h for h in cookie.get("imports", []) if isinstance(h, dict)]
    held.append({"token": token, "name": filename[:200], "user": current_user().id})
    for old in held[:-HELD_PER_SESSION]:
        _drop(old["token"])
    cookie["imports"] = held[-HELD_PER_SESSION:]
    return token


def _held(token: str) -> tuple[Optional[Path], str]:
    """The held file of this session's ``token`` and its original name; (None, "") if gone or not this session's."""
    if not _TOKEN.match(token or ""):
        return None, ""
    for held in cookie.get("imports", []):
        if isinstance(held, dict) and held.get("token") == token and held.get("user") == current_user().id:
            found = [p for p in _folder().glob(f"{token}.*") if p.suffix in SUFFIXES]
            fresh = [p for p in found if p.stat().st_mtime >= time.time() - HOLD_SECONDS]
            return (fresh[0], held["name"]) if fresh else (None, "")
    return None, ""


def _drop(token: str) -> None:
    if _TOKEN.match(token or ""):
        for path in _folder().glob(f"{token}.*"):
            path.unlink(missing_ok=True)
    cookie["imports"] = [h for h in cookie.get("imports", []) if isinstance(h, dict) and h.get("token") != token]


def _run(filename: str, data: bytes, *, dry_run: bool, only_valid: bool = False) -> dict:
    frame = read_upload(filename, data)
    report = import_inventory(get_session(), frame, catalogue_lookup=lookup_in(catalogue()), dry_run=dry_run,
                              only_valid=only_valid)
    return dump_report(report, filename)


def _page(*, report=None, token=None, error=None, status=200):
    return render_template("pages/stock_import.html", report=report, token=token, error=error,
                           required=REQUIRED_COLUMNS, optional=OPTIONAL_COLUMNS, suffixes=SUFFIXES,
                           max_kib=MAX_UPLOAD_BYTES // 1024, max_rows=MAX_UPLOAD_ROWS), status


@bp.get("/stocks/import", endpoint="stock_import")
def stock_import():
    return _page()


@bp.post("/stocks/import", endpoint="stock_import_check")
def stock_import_check():
    """Read the uploaded file, keep it, and show the dry run's report; nothing is stored in the database."""
    upload = request.files.get("file")
    if upload is None or not upload.filename:
        return _page(error=f"Choose a {' or '.join(SUFFIXES)} file to check.", status=422)
    try:
        data = upload.stream.read(MAX_UPLOAD_BYTES + 1)  # one byte more: a larger file shows as such
    finally:
        upload.close()  # a large upload is spooled to a temporary file: closed at once
    try:
        report = _run(upload.filename, data, dry_run=True)
    except InvalidInput as exc:
        return _page(error=str(exc).split(": ", 1)[-1], status=422)
    return _page(report=report, token=_hold(upload.filename, data))


@bp.post("/stocks/import/run", endpoint="stock_import_run")
def stock_import_run():
    """The real run of a held file: every row, or the accepted rows alone when the person chose that."""
    token = request.form.get("token", "")
    path, name = _held(token)
    if path is None:
        return _page(error="The checked file is no longer held (it is kept for an hour, for the session that sent "
                           "it). Upload it again.", status=422)
    only_valid = request.form.get("only_valid") == "yes"
    try:
        report = _run(name, path.read_bytes(), dry_run=False, only_valid=only_valid)
    except InvalidInput as exc:
        return _page(error=str(exc).split(": ", 1)[-1], status=422)
    if report["withheld"]:
        get_session().rollback()
        return _page(report=report, token=token, status=422)
    _drop(token)
    return _page(report=report)
