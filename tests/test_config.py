"""Configuration: defaults, then DOTLEDGER_* environment variables, then the test mapping."""

from __future__ import annotations

import pytest

from service.config import ConfigError, load_config


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


# Several worker processes (README, "Running several worker processes"). The reason for refusing
# SQLite: SQLite lets one writer at a time hold a database file's lock, WAL mode included
# (sqlite.org, "Write-Ahead Logging", section "Concurrency").
POSTGRES = "postgresql+psycopg://u@h/db"


def test_one_process_takes_sqlite_and_the_instance_key(clean_env, tmp_path):
    clean_env.delenv("DOTLEDGER_SECRET_KEY", raising=False)
    config = load_config(str(tmp_path), workers=1)
    assert config["DATABASE_URL"].startswith("sqlite:///")
    assert config["SECRET_KEY"] == (tmp_path / "secret_key").read_text().strip()


@pytest.mark.parametrize("workers", [2, 4, 64])
def test_several_processes_refuse_sqlite(clean_env, tmp_path, workers):
    clean_env.setenv("DOTLEDGER_SECRET_KEY", "k" * 64)
    with pytest.raises(ConfigError, match=f"DOTLEDGER_DATABASE_URL is SQLite.*{workers} worker processes need PostgreSQL"):
        load_config(str(tmp_path), workers=workers)


@pytest.mark.parametrize("workers", [2, 64])
def test_several_processes_need_the_key_from_the_environment(clean_env, tmp_path, workers):
    clean_env.delenv("DOTLEDGER_SECRET_KEY", raising=False)
    clean_env.setenv("DOTLEDGER_DATABASE_URL", POSTGRES)
    with pytest.raises(ConfigError, match=f"DOTLEDGER_SECRET_KEY is not set: {workers} worker processes"):
        load_config(str(tmp_path), workers=workers)
    assert not (tmp_path / "secret_key").exists()  # no key made that this process alone would know
    clean_env.setenv("DOTLEDGER_SECRET_KEY", "k" * 64)
    config = load_config(str(tmp_path), workers=workers)
    assert config["SECRET_KEY"] == "k" * 64 and config["DATABASE_URL"] == POSTGRES


@pytest.mark.parametrize("workers", [0, 65])
def test_worker_count_out_of_range(clean_env, tmp_path, workers):
    clean_env.setenv("DOTLEDGER_DATABASE_URL", POSTGRES)
    clean_env.setenv("DOTLEDGER_SECRET_KEY", "k" * 64)
    with pytest.raises(ConfigError, match="expected 1 to 64"):
        load_config(str(tmp_path), workers=workers)

