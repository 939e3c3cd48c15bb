"""Server-rendered pages (Jinja2 templates in templates/pages)."""

from flask import Blueprint

bp = Blueprint("web", __name__)


@bp.app_context_processor
def _site():
    # Every page, error pages included, names the site in its header.
    from service.store.db import get_session
    from service.store.site import site_name

    return {"site": site_name(get_session())}

from service.web import account, audit, editor, pages, procedures, waste  # noqa: E402,F401

__all__ = ["bp"]
