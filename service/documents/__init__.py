"""Printed documents: the risk-assessment sheet and the waste manifest.

HTML from the Jinja2 templates in ``templates/documents/`` (autoescaped, with a print
stylesheet), rendered to PDF by WeasyPrint. Each document's data is hashed (SHA-256 of
its canonical JSON) before rendering; the hash is printed in the footer and sent in the
``X-Document-SHA256`` response header.

``controls``, ``assessment``, ``manifest`` and ``render`` are pure (no Flask, no
database); ``sources`` gathers the records inside an app context and returns a ``Draft``
(the data), which the caller renders once the database session has ended.
"""

from service.documents.render import Document, Draft, canonical_json, data_sha256, render_pdf
from service.documents.sources import assessment_for, init_app, manifest_for

__all__ = ["Document", "Draft", "assessment_for", "manifest_for", "init_app", "canonical_json", "data_sha256",
           "render_pdf"]
