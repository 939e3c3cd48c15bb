"""What the application loads once per process: the active rule packs, the substance catalogue
and its H-statement texts.

``create_app`` calls :func:`init_app`; a bad file stops the start with the file, the key path
and (for a rule) the rule id. The files are read once per process for each rules folder and
pack list (apps made for tests share them); every layer above reads them through the
accessors here, never from the files.
"""

from __future__ import annotations

from functools import lru_cache
from typing import NamedTuple, Optional

from flask import Flask, current_app

from service.chem.substances import HazardStatements, SubstanceCatalogue, load_catalogue
from service.rules import LayeredRules, load_packs

__all__ = ["Loaded", "init_app", "active_rules", "catalogue", "statements"]

KEY = "dotledger.loaded"


class Loaded(NamedTuple):
    rules: LayeredRules
    catalogue: SubstanceCatalogue
    statements: HazardStatements


@lru_cache(maxsize=8)
def _load(rules_dir: str, packs: tuple[str, ...]) -> Loaded:
    catalogue_file, statements_file = load_catalogue(rules_dir)
    return Loaded(load_packs(rules_dir, list(packs)), catalogue_file, statements_file)


def init_app(app: Flask) -> None:
    """Load (or take from this process's earlier load) the files the ``RULES_DIR`` and ``RULE_PACKS`` settings name."""
    packs = tuple(n.strip() for n in app.config["RULE_PACKS"].split(",") if n.strip())
    loaded = _load(str(app.config["RULES_DIR"]), packs)
    app.extensions[KEY] = loaded
    app.extensions["dotledger.rules"] = loaded.rules  # the name tests and the demo loader use


def _loaded(app: Optional[Flask]) -> Loaded:
    return (app or current_app).extensions[KEY]


def active_rules(app: Optional[Flask] = None) -> LayeredRules:
    """The layered rule packs of ``app`` (default: the current app)."""
    return _loaded(app).rules


def catalogue(app: Optional[Flask] = None) -> SubstanceCatalogue:
    """The substance catalogue (``rules/substances.yaml``)."""
    return _loaded(app).catalogue


def statements(app: Optional[Flask] = None) -> HazardStatements:
    """The H-statement texts (``rules/hazard-statements.yaml``)."""
    return _loaded(app).statements
