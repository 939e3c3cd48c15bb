"""Configuration: defaults, then ``DOTLEDGER_*`` environment variables, then a test mapping."""

from __future__ import annotations

import os
import re
import secrets
from decimal import Decimal
from pathlib import Path

from service import vocab
from service.resources import RULES_DIR
from typing import Any, Mapping, Optional

__all__ = ["ConfigError", "load_config", "DEVELOPMENT_KEY", "instance_secret_key", "check_public_url",
           "check_worker_processes"]

# Once the default; now refused outside TESTING, since anyone who reads the source can sign with it.
DEVELOPMENT_KEY = "dev-only-change-me"
SECRET_KEY_FILE = "secret_key"


class ConfigError(ValueError):
    """A setting the server must not start with."""

# name -> (default, parser); the environment variable is DOTLEDGER_<NAME>.
_SETTINGS: dict[str, tuple[Any, Any]] = {
    "DATABASE_URL": (None, str),  # default: SQLite file in the instance folder
    "RULES_DIR": (str(RULES_DIR), str),
    "RULE_PACKS": ("us-federal,eu,site-example", str),
    "SECRET_KEY": (None, str),  # default: a random key kept in <instance>/secret_key
    "PAGE_SIZE": ("A4", str),
    # The address people reach the server at (e.g. https://lab.example.org), for the QR codes of the
    # container labels; default: the address a request came to (the command line needs it set).
    "PUBLIC_URL": (None, lambda v: check_public_url(v)),
    "SECURE_COOKIES": ("false", lambda v: str(v).lower() in ("1", "true", "yes")),
    "LOGIN_MAX_FAILURES_PER_ACCOUNT": (5, int),
    "LOGIN_MAX_FAILURES_PER_ADDRESS": (20, int),
    "LOGIN_WINDOW_S": (900, int),
    # Proxies in front of the server that append to X-Forwarded-For; 0 ignores the header.
    "TRUSTED_PROXIES": (0, int),
    # Share of a run's input (per element) that may stay unaccounted for the run to close.
    "BALANCE_TOLERANCE": ("0.05", lambda v: Decimal(str(v))),
    # Elements a run's mass balance follows (carbon, hydrogen and the like from solvents are not).
    "BALANCE_ELEMENTS": (",".join(vocab.BALANCE_ELEMENTS), vocab.element_list),
}


def load_config(instance_path: str, test_config: Optional[Mapping[str, Any]] = None, *,
                workers: int = 1) -> dict[str, Any]:
    """Build the configuration mapping (keys without the ``DOTLEDGER_`` prefix).

    ``workers`` is the number of server processes that will share this configuration; above 1,
    :func:`check_worker_processes` must accept it.
    """
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
    check_worker_processes(config, workers)
    if config["SECRET_KEY"] is None:
        # Tests without a key get a fresh one; a server keeps one per instance folder.
        config["SECRET_KEY"] = secrets.token_hex(32) if config.get("TESTING") else instance_secret_key(instance_path)
    elif config["SECRET_KEY"] == DEVELOPMENT_KEY and not config.get("TESTING"):
        raise ConfigError("DOTLEDGER_SECRET_KEY is the development key, with which anyone who reads the source "
                         "can forge a session; unset it (a random key is then kept in the instance folder) "
                         "or set a long random value")
    if not 0 <= config["TRUSTED_PROXIES"] <= 10:
        raise ConfigError(f"DOTLEDGER_TRUSTED_PROXIES={config['TRUSTED_PROXIES']!r}: expected 0 to 10")
    return config


def check_worker_processes(config: Mapping[str, Any], workers: int) -> None:
    """Refuse settings that several server processes cannot share (ConfigError naming the setting).

    Several processes need PostgreSQL (row locks, no single file lock that every writer of every
    process queues on) and one session key given to all of them (a key each process would make or
    read on its own machine signs sessions the others reject).

    >>> check_worker_processes({"DATABASE_URL": "postgresql+psycopg://u@h/db", "SECRET_KEY": "k" * 64}, 4)
    >>> check_worker_processes({"DATABASE_URL": "sqlite:///x.sqlite", "SECRET_KEY": "k" * 64}, 4)
    Traceback (most recent call last):
    service.config.ConfigError: DOTLEDGER_DATABASE_URL is SQLite, which serves one process: 4 worker processes need PostgreSQL (postgresql+psycopg://user@host/db); or run one process (`dotledger serve`)
    """
    if not 1 <= workers <= 64:
        raise ConfigError(f"{workers} worker processes: expected 1 to 64")
    if workers == 1:
        return
    if str(config["DATABASE_URL"]).startswith("sqlite"):
        raise ConfigError(f"DOTLEDGER_DATABASE_URL is SQLite, which serves one process: {workers} worker processes "
                          "need PostgreSQL (postgresql+psycopg://user@host/db); or run one process (`dotledger serve`)")
    if config["SECRET_KEY"] is None:
        raise ConfigError(f"DOTLEDGER_SECRET_KEY is not set: {workers} worker processes must all sign sessions with "
                          "one key; set it to the same long random value for every process, e.g. the output of "
                          "python3 -c 'import secrets; print(secrets.token_hex(32))'")


def check_public_url(value: str) -> str:
    """An http(s) address without query or fragment, at most 200 characters; ValueError otherwise.

    >>> check_public_url("https://lab.example.org/")
    'https://lab.example.org/'
    >>> check_public_url("lab.example.org")
    Traceback (most recent call last):
    ValueError: expected an address such as https://lab.example.org (http or https, no query or fragment)
    """
    if len(value) > 200 or not re.fullmatch(r"https?://[^\s/?#]+(/[^\s?#]*)?", value):
        raise ValueError("expected an address such as https://lab.example.org (http or https, no query or fragment)")
    return value


def instance_secret_key(instance_path: str) -> str:
    """The session signing key kept in ``<instance>/secret_key``, created (mode 0600) on first use."""
    path = Path(instance_path) / SECRET_KEY_FILE
    path.parent.mkdir(parents=True, exist_ok=True)
    if not path.exists():
        # Written aside, then linked into place: of two processes starting at once, one key wins
        # and neither reads a half-written file.
        draft = path.with_name(f"{SECRET_KEY_FILE}.{os.getpid()}.{secrets.token_hex(4)}")
        fd = os.open(draft, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w", encoding="ascii") as handle:
            handle.write(secrets.token_hex(32) + "\n")
        try:
            os.link(draft, path)
        except FileExistsError:
            pass
        finally:
            draft.unlink()
    key = path.read_text(encoding="ascii").strip()
    if len(key) < 32:
        raise ConfigError(f"{path}: the secret key is empty or too short; delete the file to make a new one")
    return key
