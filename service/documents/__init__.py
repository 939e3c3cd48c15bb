"""Printed documents: the risk-assessment sheet and the waste manifest.

HTML from the Jinja2 templates in ``templates/documents/`` (autoescaped, with a print
stylesheet), rendered to PDF by WeasyPrint. Each document's data is hashed (SHA-256 of
its canonical JSON) before rendering; the hash is printed in the footer and sent in the
``X-Document-SHA256`` response header.

``controls``, ``assessment``, ``manifest`` and ``render`` are pure (no Flask, no
database); ``sources`` gathers the records inside an app context and returns a ``Draft``
(the data), which the caller renders once the database session has ended.
"""

__all__ = ["Document", "Draft", "assessment_for", "manifest_for", "init_app", "canonical_json", "data_sha256",
           "render_pdf"]

# Loaded on first use (PEP 562), so that importing one module of the package (``dotledger print``'s
# commands) does not import them all.
_FROM = {"Document": "render", "Draft": "render", "canonical_json": "render", "data_sha256": "render",
         "render_pdf": "render", "assessment_for": "sources", "manifest_for": "sources", "init_app": "sources"}


def __getattr__(name: str):
    if name in _FROM:
        from importlib import import_module

        return getattr(import_module(f"service.documents.{_FROM[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
