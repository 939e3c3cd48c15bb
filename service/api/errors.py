"""The one place where errors become HTTP answers.

API paths (``service.operations.is_api_path``: the API's and the documents' routes) answer
``{"error": {"code", "message", "details"}}``; pages answer HTML.
Nothing reaches the client as a bare 500: an unexpected error is logged, rolled back and
answered with a generic message.

The guards on what a request may carry live here too, since they answer in the same shape: a path id
outside 1..2^31-1 (the range of the id columns) answers 404, a body above
``MAX_CONTENT_LENGTH`` answers 413, and a JSON body nested deeper than ``JSON_DEPTH_MAX`` answers 400
before the JSON parser or pydantic sees it.
"""

from __future__ import annotations

import logging
import re
from typing import Mapping, Optional

from flask import Flask, jsonify, make_response, render_template, request
from pydantic import ValidationError
from sqlalchemy.exc import IntegrityError
from werkzeug.exceptions import HTTPException, NotFound as NoRoute

from service.chem.cas import CasNumberError
from service.chem.formula import FormulaError
from service.chem.units import QuantityError
from service.datafiles import DataFileError
from service.nano import NanoError
from service.errors import Blocked, Conflict, CsrfFailed, Forbidden, InvalidInput, NotFound, Unauthenticated
from service.operations import is_api_path
from service.schemas import ID_MAX

__all__ = ["ApiError", "JSON_DEPTH_MAX", "error_response", "init_app"]

log = logging.getLogger(__name__)

JSON_DEPTH_MAX = 32  # the deepest request body the API takes (its own bodies nest 4 levels at most)
_JSON_STRING = re.compile(r'"(?:[^"\\]|\\.)*"', re.DOTALL)
_JSON_BRACKET = re.compile(r"[\[\]{}]")


def json_depth(text: str) -> int:
    """How deep the arrays and objects of a JSON text nest (strings skipped; no parsing).

    >>> json_depth('{"a": [1, {"b": "]]]"}]}'), json_depth('3'), json_depth('[[[]]]')
    (3, 0, 3)
    """
    depth = deepest = 0
    for bracket in _JSON_BRACKET.findall(_JSON_STRING.sub("", text)):
        depth += 1 if bracket in "[{" else -1
        deepest = max(deepest, depth)
    return deepest


class ApiError(Exception):
    """An answer with a status, a code and details (raised by views for request-level problems)."""

    def __init__(self, status: int, code: str, message: str, details: object = None,
                 headers: Optional[Mapping[str, str]] = None) -> None:
        super().__init__(message)
        self.status, self.code, self.message, self.details = status, code, message, details
        self.headers = dict(headers or {})


def _wants_json() -> bool:
    if is_api_path(request.path):
        return True
    best = request.accept_mimetypes.best_match(["application/json", "text/html"])
    return best == "application/json" and request.accept_mimetypes[best] > request.accept_mimetypes["text/html"]


# What a page error says to a person: a heading and a sentence per status (the JSON answer keeps its codes).
_PAGE_ERRORS = {
    400: ("Request refused", "The request could not be used as it was sent."),
    401: ("Please sign in", "This page needs you to be signed in."),
    403: ("Not allowed", "Your account may not open this page or do this."),
    404: ("Not found", "There is no such page, or the record does not exist."),
    405: ("Not possible here", "This address does not take that kind of request; use the page's own links and buttons."),
    409: ("Not possible now", "The change conflicts with what is stored; nothing was changed."),
    413: ("Too large", "What was sent is larger than this service accepts."),
    422: ("Please check the input", "Some of what was sent is not valid; nothing was stored."),
    500: ("Something went wrong", "An unexpected error occurred; it has been logged and nothing was changed."),
}
_CSRF_ERROR = ("The form has expired",
               "The form was missing its security token or it had expired. Go back, reload the page and send it again.")


def _page_user() -> None:
    """Let the error page's header show the signed-in user (an unknown route never ran the sign-in check)."""
    from service.auth import identify_for_page

    try:
        identify_for_page()
    except Exception:  # the database itself may be why this page is an error; answer without the name
        log.warning("could not identify the user for an error page", exc_info=True)


def _page_rows(details: object) -> list[dict]:
    """The field-level problems worth listing on a page (never a raw dump of the details)."""
    if not isinstance(details, list):
        return []
    return [d for d in details if isinstance(d, dict) and (d.get("message") or d.get("field"))]


def error_response(status: int, code: str, message: str, details: object = None):
    if _wants_json():
        response = jsonify({"error": {"code": code, "message": message, "details": details}})
        response.status_code = status
        return response
    if status != 500:
        _page_user()
    title, sentence = _CSRF_ERROR if code == "csrf_failed" else _PAGE_ERRORS.get(status, (f"Error {status}", message))
    findings = details.get("findings") if isinstance(details, dict) else None
    return render_template("pages/error.html", status=status, code=code, title=title, sentence=sentence,
                           message=message, rows=_page_rows(details), findings=findings,
                           back=_back_link()), status


def _back_link() -> str | None:
    """Where "back" leads: the page the browser came from on this site, else None (the home page)."""
    referrer = request.referrer or ""
    return referrer if referrer.startswith(request.host_url) and referrer != request.url else None


def _validation_details(exc: ValidationError) -> list[dict]:
    return [
        {"field": ".".join(str(p) for p in err["loc"]) or None, "message": err["msg"].removeprefix("Value error, "),
         "type": err["type"]}
        for err in exc.errors()
    ]


def _integrity_answer(exc: IntegrityError) -> tuple[int, str, str, list[dict]]:
    """What a constraint only the database caught means: a missing or out-of-range value (422), else a
    clash with a stored record (409), with the columns the message names (SQLite or PostgreSQL)."""
    text = str(exc.orig)
    if "NOT NULL constraint failed" in text or "violates not-null constraint" in text:
        found = re.search(r"failed: \w+\.(\w+)", text) or re.search(r'column "(\w+)"', text)
        field = found.group(1) if found else None
        return 422, "invalid_input", "a required value is missing", [{"field": field, "message": "must not be null"}]
    if "CHECK constraint failed" in text or "violates check constraint" in text:
        found = re.search(r"failed: (\w+)", text) or re.search(r'check constraint "(\w+)"', text)
        rule = found.group(1) if found else None
        return 422, "invalid_input", "a value is outside what the record allows", [{"field": None, "rule": rule}]
    found = re.search(r"UNIQUE constraint failed: ([\w., ]+)", text) or re.search(r"Key \(([^)]*)\)=", text)
    columns = [c.strip().rsplit(".", 1)[-1] for c in found.group(1).split(",")] if found else []
    return 409, "conflict", "the change conflicts with a stored record", [
        {"field": column, "message": "conflicts with a stored record"} for column in columns]


def init_app(app: Flask) -> None:
    """Install the error handlers and the request guards."""
    if app.config.get("MAX_CONTENT_LENGTH") is None:
        app.config["MAX_CONTENT_LENGTH"] = 1024 * 1024

    @app.url_value_preprocessor
    def _ids_in_range(endpoint, values):
        # Every <int:...> of a route is a record id; one outside the columns' range names no record.
        for name, value in (values or {}).items():
            if isinstance(value, int) and not 1 <= value <= ID_MAX:
                raise NoRoute(f"no record has {name} {value}: ids run from 1 to {ID_MAX}")

    @app.before_request
    def _json_depth():
        if request.is_json and json_depth(request.get_data(as_text=True)) > JSON_DEPTH_MAX:
            raise ApiError(400, "bad_request", f"the JSON body nests deeper than {JSON_DEPTH_MAX} levels")

    @app.errorhandler(ApiError)
    def _api_error(exc: ApiError):
        response = make_response(error_response(exc.status, exc.code, exc.message, exc.details))
        response.headers.update(exc.headers)
        return response

    @app.errorhandler(Unauthenticated)
    def _unauthenticated(exc: Unauthenticated):
        return error_response(401, "unauthenticated", str(exc))

    @app.errorhandler(Forbidden)
    def _forbidden(exc: Forbidden):
        return error_response(403, "forbidden", str(exc), exc.details)

    @app.errorhandler(CsrfFailed)
    def _csrf(exc: CsrfFailed):
        return error_response(400, "csrf_failed", str(exc))

    @app.errorhandler(ValidationError)
    def _validation(exc: ValidationError):
        message = "the query parameters do not validate" if request.method == "GET" else "the request body does not validate"
        return error_response(422, "invalid_input", message, _validation_details(exc))

    @app.errorhandler(NotFound)
    def _not_found(exc: NotFound):
        return error_response(404, "not_found", str(exc), {"entity": exc.entity, "id": exc.ident})

    @app.errorhandler(Blocked)
    def _blocked(exc: Blocked):
        from service.present.serialize import finding

        findings = [finding(f) for f in exc.findings]
        return error_response(409, "blocked", str(exc), {"findings": findings})

    @app.errorhandler(Conflict)
    def _conflict(exc: Conflict):
        return error_response(409, "conflict", str(exc), [{"field": exc.field, "value": exc.value}])

    @app.errorhandler(InvalidInput)
    def _invalid(exc: InvalidInput):
        return error_response(422, "invalid_input", str(exc), [{"field": exc.field, "message": str(exc)}])

    @app.errorhandler(QuantityError)
    def _quantity(exc: QuantityError):
        return error_response(422, "invalid_quantity", str(exc), [{"field": exc.field, "value": exc.text}])

    @app.errorhandler(FormulaError)
    def _formula(exc: FormulaError):
        return error_response(422, "invalid_formula", str(exc), [{"field": "formula", "position": exc.position}])

    @app.errorhandler(CasNumberError)
    def _cas(exc: CasNumberError):
        return error_response(422, "invalid_cas", str(exc), [{"field": "cas", "value": exc.text}])

    @app.errorhandler(NanoError)
    def _nano(exc: NanoError):
        details = {k: v for k, v in vars(exc).items() if isinstance(v, (str, int, float, type(None)))}
        return error_response(422, "invalid_estimate", str(exc), details)

    @app.errorhandler(DataFileError)
    def _data_file(exc: DataFileError):
        return error_response(500, "bad_data_file", "a data file in rules/ is invalid", {"file": exc.path})

    @app.errorhandler(IntegrityError)
    def _integrity(exc: IntegrityError):
        # Service functions check what they can first; this answers what only the database saw (a race,
        # a check the schemas missed). Logged: each one is a check to add where the request is read.
        log.warning("constraint caught by the database on %s %s: %s", request.method, request.path, exc.orig)
        return error_response(*_integrity_answer(exc))

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException):
        code = (exc.name or "error").lower().replace(" ", "_")
        details = None
        if exc.code == 413 and request.mimetype == "multipart/form-data":  # an upload: name the file it carried
            details = [{"field": "file", "message": f"the upload is larger than "
                                                    f"{app.config['MAX_CONTENT_LENGTH']:,} bytes"}]
        response = make_response(error_response(exc.code or 500, code, exc.description or exc.name, details))
        for name, value in exc.get_headers():  # Allow on a 405, and the like
            if name.lower() != "content-type":
                response.headers[name] = value
        return response

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception):  # pragma: no cover - exercised only by bugs
        log.exception("unexpected error on %s %s", request.method, request.path)
        return error_response(500, "internal_error", "an unexpected error occurred; it has been logged")
