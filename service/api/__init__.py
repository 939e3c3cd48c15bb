"""JSON API under /api/v1: one blueprint, one module per resource area.

The printed documents serve under the same prefix from a blueprint of their own
(``service.documents.routes``); ``service.operations.is_api_path`` treats both alike.
"""

from flask import Blueprint

from service.operations import API_PREFIX

bp = Blueprint("api", __name__, url_prefix=API_PREFIX)

from service.api import areas, identity, imports, inventory, meta, movements, procedures, reports, runs, waste  # noqa: E402,F401  (routes register on bp)
from service.api import idempotency  # noqa: E402

idempotency.install(bp)

__all__ = ["bp"]
