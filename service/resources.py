"""Where dotledger's data files are: ``rules/`` and ``templates/`` of a checkout, or the copies
that travel inside the installed package (``service/bundled/``, see pyproject.toml).

Imports neither Flask nor the database, so the pure core and the documents may use it.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

__all__ = ["PACKAGE_DIR", "INSTALLED", "RULES_DIR", "TEMPLATES_DIR", "default_instance_path"]

PACKAGE_DIR = Path(__file__).resolve().parent
_BUNDLED = PACKAGE_DIR / "bundled"

# A built (non-editable) install carries service/bundled/; a checkout (or an editable install of
# one) has rules/ and templates/ beside the package folder.
INSTALLED = _BUNDLED.is_dir()
_BASE = _BUNDLED if INSTALLED else PACKAGE_DIR.parent

RULES_DIR = _BASE / "rules"
TEMPLATES_DIR = _BASE / "templates"


def default_instance_path() -> Path:
    """The folder for the SQLite database and other instance files.

    ``DOTLEDGER_INSTANCE_PATH`` if set; else ``instance/`` of the checkout; for an installed package
    ``<sys.prefix>/var/dotledger-instance`` (Flask's convention for installed applications), so that
    every command of one installation finds the same database whatever the working folder.
    """
    configured = os.environ.get("DOTLEDGER_INSTANCE_PATH")
    if configured:
        return Path(configured).resolve()
    if INSTALLED:
        return Path(sys.prefix) / "var" / "dotledger-instance"
    return PACKAGE_DIR.parent / "instance"
