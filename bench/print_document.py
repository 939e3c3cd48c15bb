"""Time ``dotledger print assessment 1`` against WeasyPrint's own command line on the same HTML.

    .venv/bin/python bench/print_document.py [REPEATS]      # interleaved repetitions, default 9

Makes the demo database in a temporary folder (``dotledger demo``), writes the HTML the print
command renders for procedure 1 (the same ``assessment_for`` and ``Draft.render`` the command calls),
then runs, each as a fresh subprocess and interleaved:

- ``dotledger print assessment 1 --output x.pdf`` (start the application, gather the data, render
  the HTML, write the PDF);
- ``weasyprint same.html y.pdf`` with the templates folder as base URL (what the PDF alone costs,
  with WeasyPrint's own start).

Prints the medians and the ratio of the command to WeasyPrint. No absolute time is asserted.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

from subprocess_runs import DOTLEDGER, PYTHON, ROOT, interleaved_medians

sys.path.insert(0, str(ROOT))
WEASYPRINT = [PYTHON, "-c", "from weasyprint.__main__ import main; main()"]  # the `weasyprint` script


def write_html(database_url: str, target: Path) -> None:
    """The HTML ``dotledger print assessment 1`` renders, by the same functions."""
    from service.app import create_app
    from service.documents.sources import assessment_for
    from service.store import inventory
    from service.store.db import get_session
    from service.store.models import Procedure

    app = create_app({"DATABASE_URL": database_url})
    with app.test_request_context():
        draft = assessment_for(inventory.get(get_session(), Procedure, 1))
    target.write_text(draft.render().html, encoding="utf-8")
    app.extensions["dotledger.engine"].dispose()


def main(repeats: int) -> None:
    from service.documents.render import TEMPLATES

    with tempfile.TemporaryDirectory() as folder:
        work = Path(folder)
        url = f"sqlite:///{work / 'demo.sqlite'}"
        env = {**os.environ, "DOTLEDGER_DATABASE_URL": url}
        subprocess.run([*DOTLEDGER, "demo"], env=env, cwd=ROOT, check=True, stdout=subprocess.DEVNULL)
        html = work / "assessment.html"
        write_html(url, html)
        runs = {"dotledger print assessment 1": [*DOTLEDGER, "print", "assessment", "1", "--output", str(work / "x.pdf")],
                "weasyprint same.html": [*WEASYPRINT, "-u", str(TEMPLATES), str(html), str(work / "y.pdf")]}
        medians = interleaved_medians(runs, env, repeats)
    ratio = medians["dotledger print assessment 1"] / medians["weasyprint same.html"]
    print(f"ratio dotledger print assessment 1 / weasyprint same.html: {ratio:.2f}"
          f"   (.venv/bin/python bench/print_document.py {repeats})")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 9)
