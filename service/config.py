"""Configuration: defaults, then ``DOTLEDGER_*`` environment variables, then a test mapping."""

from __future__ import annotations

import os
from decimal import Decimal
from pathlib import Path

from service import vocab
from service.resources import RULES_DIR
from typing import Any, Mapping, Optional

__all__ = ["load_config"]

# name -> (default, parser); the environment variable is DOTLEDGER_<NAME>.
_SETTINGS: dict[str, tuple[Any, Any]] = {
    "DATABASE_URL": (None, str),  # default: SQLite file in the instance folder
    "RULES_DIR": (str(RULES_DIR), str),
    "RULE_PACKS": ("us-federal,eu,site-example", str),
    "SECRET_KEY": ("dev-only-change-me", str),
    "PAGE_SIZE": ("A4", str),
    "SECURE_COOKIES": ("false", lambda v: str(v).lower() in ("1", "true", "yes")),
    "LOGIN_MAX_FAILURES_PER_ACCOUNT": (5, int),
    "LOGIN_MAX_FAILURES_PER_ADDRESS": (20, int),
    "LOGIN_WINDOW_S": (900, int),
    # Share of a run's input (per element) that may stay unaccounted for the run to close.
    "BALANCE_TOLERANCE": ("0.05", lambda v: Decimal(str(v))),
    # Elements a run's mass balance follows (carbon, hydrogen and the like from solvents are not).
    "BALANCE_ELEMENTS": (",".join(vocab.BALANCE_ELEMENTS), vocab.element_list),
}


def load_config(instance_path: str, test_config: Optional[Mapping[str, Any]] = None) -> dict[str, Any]:
    """Build the configuration mapping (keys without the ``DOTLEDGER_`` prefix)."""
    config: dict[str, Any] = {}
    for name, (default, parse) in _SETTINGS.items():
        raw = os.environ.get(f"DOTLEDGER_{name}")
        value = raw if raw not in (None, "") else default
        try:
            config[name] = None if value is None else parse(value)
        except ValueError as exc:
            raise ValueError(f"DOTLEDGER_{name}={value!r}: {exc}") from None
    if config["DATABASE_URL"] is None:
        config["DATABASE_URL"] = f"sqlite:///{Path(instance_path) / 'dotledger.sqlite'}"
    config.update(test_config or {})
    return config
