"""``dotledger print`` renders in a child started ahead (service.documents.render.PdfWorker).

The child imports WeasyPrint while the command gathers the data; the PDF must be the one WeasyPrint
makes of the same HTML in this process (compared by pypdf's text and page count), and every way the
child can fail must leave the command rendering in its own process. Each case runs in a fresh
interpreter, where nothing has imported WeasyPrint yet and no other thread runs (the worker forks only then).
"""

from __future__ import annotations

import io
import json
import os
import subprocess
import sys
from pathlib import Path

from pypdf import PdfReader

from service.documents.render import render_pdf

ROOT = Path(__file__).resolve().parents[1]
HTML = "<html><body><h1>Worker check</h1><p>12.5 µg Cd in 40 mL acetone</p><p style='page-break-before: always'>two</p></body></html>"


def _run(script: str, **env) -> dict:
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True, text=True, timeout=300,
                          env={**os.environ, **env})
    assert done.returncode == 0, done.stderr[-3000:]
    return json.loads(done.stdout.strip().splitlines()[-1])


def _text(pdf: bytes) -> tuple[int, list[str]]:
    reader = PdfReader(io.BytesIO(pdf))
    return len(reader.pages), [page.extract_text() for page in reader.pages]


PRELUDE = f"""
import json, os, sys, signal, threading
from service.documents.render import PdfWorker
HTML = {HTML!r}
"""


def test_the_child_renders_what_weasyprint_renders_here(tmp_path):
    out = tmp_path / "child.pdf"
    answer = _run(PRELUDE + f"""
worker = PdfWorker()
started = worker.pid is not None
pdf = worker.pdf(HTML)
open({str(out)!r}, "wb").write(pdf)
try:
    os.waitpid(-1, os.WNOHANG)  # any child still to be reaped?
    children = True
except ChildProcessError:
    children = False
print(json.dumps({{"started": started, "imported_here": "weasyprint" in sys.modules, "children_left": children}}))
""")
    assert answer == {"started": True, "imported_here": False, "children_left": False}
    child = out.read_bytes()
    assert child.startswith(b"%PDF-")
    assert _text(child) == _text(render_pdf(HTML))


def test_a_child_that_died_leaves_the_rendering_to_the_command(tmp_path):
    out = tmp_path / "here.pdf"
    answer = _run(PRELUDE + f"""
worker = PdfWorker()
os.kill(worker.pid, signal.SIGKILL)
pdf = worker.pdf(HTML)
open({str(out)!r}, "wb").write(pdf)
print(json.dumps({{"imported_here": "weasyprint" in sys.modules, "pid": worker.pid}}))
""")
    assert answer == {"imported_here": True, "pid": None}
    assert _text(out.read_bytes()) == _text(render_pdf(HTML))


def test_no_child_beside_another_thread_or_after_weasyprint_and_none_left_behind():
    answer = _run(PRELUDE + """
stop = threading.Event()
thread = threading.Thread(target=stop.wait)
thread.start()
beside_thread = PdfWorker().pid
stop.set(); thread.join()
worker = PdfWorker()
first = worker.pid
worker.close()  # the command ended before its PDF: the child is stopped and reaped
try:
    os.waitpid(first, os.WNOHANG)
    reaped = False
except ChildProcessError:
    reaped = True
import weasyprint
after_import = PdfWorker().pid
print(json.dumps({"beside_thread": beside_thread, "first": first is not None, "reaped": reaped,
                  "after_import": after_import}))
""")
    assert answer == {"beside_thread": None, "first": True, "reaped": True, "after_import": None}


def test_print_assessment_from_the_command_line(tmp_path):
    """The console script as a user runs it, on the demo database: a PDF with the procedure's title."""
    env = {"DOTLEDGER_DATABASE_URL": f"sqlite:///{tmp_path / 'demo.sqlite'}"}
    command = [sys.executable, "-c", "from service.console import main; main()"]
    subprocess.run([*command, "demo"], cwd=ROOT, env={**os.environ, **env}, check=True, capture_output=True, timeout=600)
    target = tmp_path / "ra.pdf"
    # ... and what the printing process loaded: a command that serves no request starts without the pages and
    # the API, and a process on SQLite without PostgreSQL's dialect.
    probe = ("import sys\nfrom service.console import main\n"
             f"try:\n    main(['print', 'assessment', '1', '--output', {str(target)!r}])\n"
             "except SystemExit as exc:\n    assert exc.code in (0, None), exc.code\n"
             "print(sorted(m for m in ('service.api', 'service.web', 'service.auth', 'sqlalchemy.dialects.postgresql')"
             " if m in sys.modules))\n")
    done = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, env={**os.environ, **env}, capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-3000:]
    pages, text = _text(target.read_bytes())
    digest = done.stdout.split("SHA-256 ")[1].splitlines()[0].strip()
    assert pages >= 1 and digest in text[0] and "Risk assessment" in " ".join(text)
    assert done.stdout.strip().splitlines()[-1] == "[]"


def test_the_warm_up_renders_a_page_in_the_documents_stylesheet(monkeypatch):
    """The child's warm-up (while the parent gathers the data) renders a real page with print.css; it swallows
    its errors, so this checks that it does not fail silently (a moved stylesheet, a broken page)."""
    import service.documents.render as render

    made = []

    def recording(html: str) -> bytes:
        pdf = render_pdf(html)  # raises here, where the warm-up would swallow it
        made.append((html, pdf))
        return pdf

    monkeypatch.setattr(render, "render_pdf", recording)
    render._warm_up()
    assert len(made) == 1
    html, pdf = made[0]
    assert (render.TEMPLATES / "print.css").read_text(encoding="utf-8") in html
    pages, text = _text(pdf)
    assert pages == 1 and "12.5 µg Cd" in text[0]
