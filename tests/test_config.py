"""Configuration: defaults, then DOTLEDGER_* environment variables, then the test mapping."""

from __future__ import annotations

import pytest

from service.config import load_config


@pytest.fixture
def clean_env(monkeypatch):
    for name in ("DATABASE_URL", "SECURE_COOKIES", "LOGIN_WINDOW_S", "PAGE_SIZE"):
        monkeypatch.delenv(f"DOTLEDGER_{name}", raising=False)
    return monkeypatch


def test_defaults_give_sqlite_in_the_instance_folder(clean_env, tmp_path):
    config = load_config(str(tmp_path))
    assert config["DATABASE_URL"] == f"sqlite:///{tmp_path / 'dotledger.sqlite'}"
    assert config["SECURE_COOKIES"] is False
    assert config["LOGIN_WINDOW_S"] == 900


def test_environment_then_test_mapping(clean_env, tmp_path):
    clean_env.setenv("DOTLEDGER_DATABASE_URL", "postgresql+psycopg://u@h/db")
    clean_env.setenv("DOTLEDGER_SECURE_COOKIES", "true")
    clean_env.setenv("DOTLEDGER_LOGIN_WINDOW_S", "60")
    clean_env.setenv("DOTLEDGER_PAGE_SIZE", "A4")
    config = load_config(str(tmp_path), {"PAGE_SIZE": "Letter"})
    assert config["DATABASE_URL"] == "postgresql+psycopg://u@h/db"
    assert config["SECURE_COOKIES"] is True and config["LOGIN_WINDOW_S"] == 60
    assert config["PAGE_SIZE"] == "Letter"
