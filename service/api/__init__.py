"""JSON API under /api/v1: one blueprint, one module per resource area."""

from flask import Blueprint

bp = Blueprint("api", __name__, url_prefix="/api/v1")

from service.api import documents, identity, inventory, meta, procedures, reports, runs, waste  # noqa: E402,F401  (routes register on bp)

__all__ = ["bp"]
