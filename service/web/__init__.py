"""Server-rendered pages (Jinja2 templates in templates/pages)."""

from flask import Blueprint

bp = Blueprint("web", __name__)

from service.web import account, pages  # noqa: E402,F401

__all__ = ["bp"]
