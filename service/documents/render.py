"""From a document's data to HTML (Jinja2, autoescaped) and PDF (WeasyPrint).

The data dict is hashed first (SHA-256 of its canonical JSON: sorted keys, no spaces,
UTF-8), then rendered with the hash beside it, so the printed hash identifies exactly
the data that went into the document. Imports neither Flask nor the database.
"""

from __future__ import annotations

import gc
import hashlib
import json
import os
import select
import signal
import sys
import threading
from dataclasses import dataclass
from pathlib import Path

from jinja2 import Environment, FileSystemBytecodeCache, FileSystemLoader, StrictUndefined, select_autoescape

from service.chem.figures import TEMPLATE_FILTERS
from service.resources import TEMPLATES_DIR

__all__ = ["PAGE_SIZES", "Draft", "Document", "PdfWorker", "canonical_json", "data_sha256", "render_html", "render_pdf",
           "page_size_css", "qr_data_uri"]

TEMPLATES = TEMPLATES_DIR / "documents"

# Setting value -> CSS @page size keyword (A4 = ISO 216, 210 × 297 mm; Letter = ANSI, 8.5 × 11 in).
PAGE_SIZES = {"A4": "A4", "Letter": "letter"}


@dataclass(frozen=True)
class Document:
    """A rendered document: its id, data hash, HTML and (once asked for) PDF bytes."""

    document_id: str
    sha256: str
    html: str
    filename: str  # without extension

    def pdf(self) -> bytes:
        return render_pdf(self.html)


def canonical_json(data: dict) -> bytes:
    """The bytes that are hashed: sorted keys, compact separators, UTF-8.

    >>> canonical_json({"b": 1, "a": "µg"})
    b'{"a":"\\xc2\\xb5g","b":1}'
    """
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False).encode("utf-8")


def data_sha256(data: dict) -> str:
    """SHA-256 (hex) of the canonical JSON of ``data``.

    >>> data_sha256({})  # SHA-256 of the two bytes "{}"
    '44136fa355b3678a1146ad16f7e8649e94fb4fc21fe77e8310c060f61caaff8a'
    """
    return hashlib.sha256(canonical_json(data)).hexdigest()


def page_size_css(setting: str) -> str:
    """The CSS page size for the ``PAGE_SIZE`` setting; ValueError names the allowed values."""
    try:
        return PAGE_SIZES[setting]
    except KeyError:
        raise ValueError(f"PAGE_SIZE is {setting!r}; use one of {', '.join(PAGE_SIZES)}") from None


def format_timestamp(value: str | None) -> str:
    """An ISO timestamp (UTC) to minutes, for print.

    >>> format_timestamp("2026-12-02T02:42:31.003619+00:00")
    '2026-12-02 02:42 UTC'
    >>> format_timestamp(None)
    '—'
    """
    return "—" if not value else f"{value[:16].replace('T', ' ')} UTC"


def qr_data_uri(payload: str) -> str:
    """A QR code of ``payload`` (segno; error correction level M, a quiet zone of 4 modules as ISO/IEC 18004
    asks) as an SVG ``data:`` URI without a fixed size, so the template gives it its size in millimetres.

    >>> qr_data_uri("https://lab.example.org/containers/3/entry").startswith("data:image/svg+xml")
    True
    """
    import segno  # only when a label is drawn

    return segno.make(payload, error="m", micro=False, boost_error=False).svg_data_uri(border=4, omitsize=True)


class _CompiledTemplates(FileSystemBytecodeCache):
    """Jinja's cache of compiled templates in its private folder (``_jinja2-cache-<uid>`` in the temporary
    directory, mode 0700 and owned by this account, else refused), so a command does not compile the
    templates again at each start (about 0.1 s for all of them). An entry is keyed by the template's name
    and source, so an edited template compiles afresh. A cache that cannot be written costs only the time."""

    def dump_bytecode(self, bucket) -> None:
        try:
            super().dump_bytecode(bucket)
        except OSError:
            pass


def _compiled_templates() -> FileSystemBytecodeCache | None:
    try:
        return _CompiledTemplates()
    except (OSError, RuntimeError):  # no temporary directory, or one this account does not own alone
        return None


def _environment() -> Environment:
    env = Environment(loader=FileSystemLoader(str(TEMPLATES)),
                      autoescape=select_autoescape(["html", "svg"], default_for_string=True),
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True,
                      bytecode_cache=_compiled_templates())
    env.filters["mg"] = lambda ug: f"{ug / 1000:,.3f}"
    env.filters["num"] = lambda v, fmt="{:,.3g}": "—" if v is None else fmt.format(v)
    env.filters["ts"] = format_timestamp
    env.filters["qr"] = qr_data_uri
    env.filters.update(TEMPLATE_FILTERS)  # concentrations, percentages and units as on the pages
    return env


_ENV = _environment()


def render_html(template: str, data: dict, *, document_id: str, filename: str) -> Document:
    """Hash ``data``, then render ``templates/documents/<template>`` with ``data`` and the hash."""
    digest = data_sha256(data)
    # A document on the site's paper names its PAGE_SIZE; a label sets its own page size.
    page_size = page_size_css(data["page_size"]) if "page_size" in data else None
    html = _ENV.get_template(template).render(doc=data, sha256=digest, page_size=page_size,
                                              stylesheet=(TEMPLATES / "print.css").read_text(encoding="utf-8"))
    return Document(document_id=document_id, sha256=digest, html=html, filename=filename)


@dataclass(frozen=True)
class Draft:
    """A document's data, gathered: :meth:`render` hashes it and makes the HTML (no database needed)."""

    template: str  # in templates/documents/
    data: dict
    document_id: str
    filename: str  # without extension

    def render(self) -> Document:
        return render_html(self.template, self.data, document_id=self.document_id, filename=self.filename)


def render_pdf(html: str) -> bytes:
    """The PDF for ``html`` (WeasyPrint; images and fonts only from the templates folder)."""
    from weasyprint import HTML  # heavy import, only when a PDF is asked for

    return HTML(string=html, base_url=str(Path(TEMPLATES))).write_pdf()


class PdfWorker:
    """A PDF renderer started ahead: a forked child imports WeasyPrint (about a second of the command's
    start) while this process gathers the document's data, then renders the HTML it is sent.

    For a command that prints one document: ``with PdfWorker() as worker: ...; pdf = worker.pdf(html)``.
    The HTML goes to the child through a pipe and the PDF comes back through another, so the PDF is the
    one :func:`render_pdf` makes of the same HTML (the child runs it). With one CPU the two starts simply
    take turns. The child is not started where ``os.fork`` is missing, where another thread runs (a fork
    copies no other thread, and locks they hold stay locked in the child) or where WeasyPrint is already
    imported (nothing to gain); then, and whenever the child fails or says nothing, :meth:`pdf` renders
    in this process, where an error shows as it would without the child.
    """

    def __init__(self) -> None:
        self.pid: int | None = None
        self._send = self._receive = -1
        if not hasattr(os, "fork") or "weasyprint" in sys.modules or threading.active_count() > 1:
            return
        html_r, html_w = os.pipe()
        pdf_r, pdf_w = os.pipe()
        sys.stdout.flush()
        sys.stderr.flush()
        pid = os.fork()
        if pid == 0:  # the child: never returns
            os.close(html_w)
            os.close(pdf_r)
            _render_for_parent(html_r, pdf_w)
        os.close(html_r)
        os.close(pdf_w)
        self.pid, self._send, self._receive = pid, html_w, pdf_r

    def pdf(self, html: str) -> bytes:
        if self.pid is not None:
            try:
                with os.fdopen(self._send, "wb") as pipe:
                    self._send = -1
                    pipe.write(html.encode("utf-8"))
                with os.fdopen(self._receive, "rb") as pipe:
                    self._receive = -1
                    answer = pipe.read()
            except OSError:  # the child is gone
                answer = b""
            self._reap()
            if answer.startswith(_DONE):
                return answer[len(_DONE):]
        return render_pdf(html)

    def close(self) -> None:
        """Stop the child if it still runs (the command ended without a PDF)."""
        if self.pid is not None:
            os.kill(self.pid, signal.SIGTERM)
            self._reap()

    def _reap(self) -> None:
        for fd in (self._send, self._receive):
            if fd >= 0:
                os.close(fd)
        self._send = self._receive = -1
        os.waitpid(self.pid, 0)
        self.pid = None

    def __enter__(self) -> "PdfWorker":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


_DONE = b"%dotledger-pdf\n"  # the child's answer starts with this when the PDF follows


def _render_for_parent(html_r: int, pdf_w: int) -> None:
    """In the forked child: import WeasyPrint, read the HTML until the parent closes the pipe, answer with the PDF.

    Leaves with ``os._exit``: no buffer, handler or atexit hook inherited from the parent runs twice.
    Collections are paused while WeasyPrint loads; what it loaded is then frozen out of them (``gc.freeze``).
    While the parent is still gathering the data, a small page in the documents' stylesheet is rendered
    and thrown away (:func:`_warm_up`).
    """
    status = 1
    try:
        gc.disable()  # the import makes many lasting objects and little garbage: no collection walks them meanwhile
        import weasyprint  # noqa: F401 - the point of the child: the import runs while the parent works

        gc.freeze()  # what the import made stays out of the collections of the rendering
        gc.enable()

        if not select.select([html_r], [], [], 0)[0]:  # nothing sent yet: the parent is still at work
            _warm_up()
        with os.fdopen(html_r, "rb") as pipe:
            html = pipe.read().decode("utf-8")
        if html:
            pdf = render_pdf(html)
            with os.fdopen(pdf_w, "wb") as pipe:
                pipe.write(_DONE + pdf)
        status = 0
    except BaseException:  # noqa: BLE001 - the parent renders again in its own process and shows the error
        pass
    finally:
        os._exit(status)


def _warm_up() -> None:
    """Render a small page in the documents' stylesheet (a heading, bold, italic, a table) and drop it: a
    process's first rendering loads the fonts and fills WeasyPrint's caches, about 0.1–0.2 s more than the
    next one (measured here on the assessment). Any failure is left to the real rendering to show."""
    try:
        stylesheet = (TEMPLATES / "print.css").read_text(encoding="utf-8")
        render_pdf(f"<html><head><style>{stylesheet}</style></head><body><h1>Warm-up</h1>"
                   "<p>12.5 µg <b>Cd</b> in <i>40 mL</i> acetone</p>"
                   "<table><tr><th>element</th><td>mass</td></tr></table></body></html>")
    except Exception:  # noqa: BLE001 - a warm-up only
        pass
