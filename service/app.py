"""The Flask application factory."""

from __future__ import annotations

from typing import Any, Mapping, Optional

from flask import Flask
from werkzeug.routing import Rule

from service.config import load_config
from service.resources import TEMPLATES_DIR, default_instance_path

__all__ = ["create_app"]


class LazyBuilderRule(Rule):
    """werkzeug's URL rule, compiling its two URL builders on the first ``url_for`` that needs them.

    werkzeug writes and compiles two Python functions per rule as the rule is added (about 0.7 ms a
    rule here, so about 0.1 s for this application's routes at every start, every command and every
    test's app), while most processes build few of those URLs. Matching is unchanged. Should a later
    werkzeug stop calling ``_compile_builder``, this override is simply never used.
    """

    def _compile_builder(self, append_unknown: bool = True):
        compiled = []

        def build(rule, *args, **kwargs):
            if not compiled:
                compiled.append(Rule._compile_builder(rule, append_unknown))
            return compiled[0](rule, *args, **kwargs)

        return build


def create_app(test_config: Optional[Mapping[str, Any]] = None, *, routes: bool = True) -> Flask:
    """Create the app: defaults, then ``DOTLEDGER_*`` environment, then ``test_config``.

    ``routes=False`` leaves out what only answers HTTP requests (the pages, the API, the sign-in and
    the error pages), for a command that works on the database, the rules and the documents alone:
    its start skips importing and registering them (about a tenth of a second here).
    """
    app = _Flask(
        __name__,
        instance_path=str(default_instance_path()),
        template_folder=str(TEMPLATES_DIR),
        static_folder="web/static",
    )
    app.config.update(load_config(app.instance_path, test_config))
    app.config["VERSION"] = _version()
    app.json.sort_keys = False

    from service import appdata, documents
    from service.store import db

    db.init_app(app)
    appdata.init_app(app)  # rule packs, catalogue, H-statements: once per process; a bad file stops the start
    documents.init_app(app)  # controls and transport suggestions, likewise
    if not routes:
        return app

    from service import auth
    from service.api import bp as api_bp
    from service.api import errors
    from service.documents.routes import bp as documents_bp
    from service.documents.routes import pages as documents_pages_bp
    from service.web import bp as web_bp

    errors.init_app(app)
    auth.init_app(app)
    app.register_blueprint(api_bp)
    app.register_blueprint(documents_bp)  # under /api/v1 too: tokens, JSON errors, in the OpenAPI document
    app.register_blueprint(documents_pages_bp)  # the PDFs again for the pages: the sign-in cookie, HTML errors
    app.register_blueprint(web_bp)
    if app.config["TRUSTED_PROXIES"]:
        from werkzeug.middleware.proxy_fix import ProxyFix

        # The client address (sign-in lockout) and scheme as the trusted proxies saw them.
        proxies = app.config["TRUSTED_PROXIES"]
        app.wsgi_app = ProxyFix(app.wsgi_app, x_for=proxies, x_proto=proxies)
    return app


class _Flask(Flask):
    url_rule_class = LazyBuilderRule


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("dotledger")
    except PackageNotFoundError:  # pragma: no cover - running from a plain checkout
        return "0.0.0"
