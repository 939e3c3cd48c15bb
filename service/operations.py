"""What every JSON/document route under /api/v1 shares, whichever blueprint holds it.

``API_PREFIX`` is where the API's routes live (the ``api`` and the ``documents`` blueprints
both mount there), and ``is_api_path`` is the one test of whether a request is an API call:
``service.auth`` then takes a bearer token (never the sign-in cookie) and ``service.api.errors``
answers ``{"error": {...}}`` JSON. ``@operation`` records what a view declares for the OpenAPI
document that ``service.api.openapi`` builds from every route under the prefix.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Optional, Union

from pydantic import BaseModel

__all__ = ["API_PREFIX", "JSON", "Operation", "operation", "declared", "is_api_path"]

API_PREFIX = "/api/v1"
JSON = "application/json"


def is_api_path(path: str) -> bool:
    """Whether a request path is an API call (bearer tokens, JSON errors): anything under /api/."""
    return path.startswith("/api/")


@dataclass(frozen=True)
class Operation:
    body: Optional[type[BaseModel]] = None  # the model the view validates its JSON body with
    body_required: bool = True
    upload: Optional[str] = None  # the multipart/form-data file field the view reads (instead of a JSON body)
    query: Optional[type[BaseModel]] = None  # the model the view validates its query string with
    response: Optional[type[BaseModel]] = None  # the shape of the success answer (of one item if paged)
    paged: bool = False  # the answer is {"items", "total", "limit", "offset"}
    status: Union[int, tuple[int, ...]] = 200
    errors: tuple[int, ...] = ()  # 4xx answers beyond those the route implies
    media: tuple[str, ...] = (JSON,)
    summary: Optional[str] = None


def operation(**spec) -> Callable:
    """Record ``Operation(**spec)`` on the view for the document builder; the view is unchanged."""
    described = Operation(**spec)

    def mark(view: Callable) -> Callable:
        view.openapi_operation = described
        return view

    return mark


def declared(view: Callable) -> Optional[Operation]:
    return getattr(view, "openapi_operation", None)
