"""Server-rendered pages (Jinja2 templates in templates/pages)."""

from flask import Blueprint

from service.chem.figures import TEMPLATE_FILTERS

bp = Blueprint("web", __name__)


@bp.record_once
def _filters(state) -> None:
    # Concentrations, percentages and units read the same on every page and in the documents.
    state.app.jinja_env.filters.update(TEMPLATE_FILTERS)


@bp.app_context_processor
def _site():
    # Every page, error pages included, names the site in its header.
    from service.store.db import get_session
    from service.store.site import site_name

    return {"site": site_name(get_session())}

from service.web import account, audit, editor, pages, procedures, waste  # noqa: E402,F401
from service.web import runs  # noqa: E402,F401
from service.web import mixture_form, stock_import, stock_moves, stock_pages  # noqa: E402,F401
from service.web import ledger  # noqa: E402,F401
from service.web import containers, entries  # noqa: E402,F401

__all__ = ["bp"]
