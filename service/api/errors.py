"""The one place where errors become HTTP answers.

API paths (``service.operations.is_api_path``: the API's and the documents' routes) answer
``{"error": {"code", "message", "details"}}``; pages answer HTML.
Nothing reaches the client as a bare 500: an unexpected error is logged, rolled back and
answered with a generic message.
"""

from __future__ import annotations

import logging
from typing import Mapping, Optional

from flask import Flask, jsonify, make_response, render_template, request
from pydantic import ValidationError
from werkzeug.exceptions import HTTPException

from service.chem.cas import CasNumberError
from service.chem.formula import FormulaError
from service.chem.units import QuantityError
from service.datafiles import DataFileError
from service.nano import NanoError
from service.errors import Blocked, Conflict, CsrfFailed, Forbidden, InvalidInput, NotFound, Unauthenticated
from service.operations import is_api_path

__all__ = ["ApiError", "error_response", "init_app"]

log = logging.getLogger(__name__)


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


def error_response(status: int, code: str, message: str, details: object = None):
    if _wants_json():
        response = jsonify({"error": {"code": code, "message": message, "details": details}})
        response.status_code = status
        return response
    rows = details if isinstance(details, list) and all(isinstance(d, dict) for d in details) else None
    return render_template("pages/error.html", status=status, code=code, message=message, details=details,
                           rows=rows), status


def _validation_details(exc: ValidationError) -> list[dict]:
    return [
        {"field": ".".join(str(p) for p in err["loc"]) or None, "message": err["msg"].removeprefix("Value error, "),
         "type": err["type"]}
        for err in exc.errors()
    ]


def init_app(app: Flask) -> None:
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

    @app.errorhandler(HTTPException)
    def _http(exc: HTTPException):
        code = (exc.name or "error").lower().replace(" ", "_")
        return error_response(exc.code or 500, code, exc.description or exc.name)

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception):  # pragma: no cover - exercised only by bugs
        log.exception("unexpected error on %s %s", request.method, request.path)
        return error_response(500, "internal_error", "an unexpected error occurred; it has been logged")
