"""Settings: environment prefix and a default database outside the working tree."""

from __future__ import annotations

from pathlib import Path

from service.config import Settings, default_database_url


def test_default_database_in_user_data_dir(monkeypatch, tmp_path):
    monkeypatch.delenv("FIELDRATE_DATABASE_URL", raising=False)
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    url = Settings().database_url
    assert url == f"sqlite:///{tmp_path / 'xdg' / 'fieldrate' / 'fieldrate.db'}"
    assert not url.startswith(f"sqlite:///{Path.cwd()}")


def test_default_without_xdg(monkeypatch):
    monkeypatch.delenv("XDG_DATA_HOME", raising=False)
    assert default_database_url().endswith("/.local/share/fieldrate/fieldrate.db")


def test_environment_prefix(monkeypatch):
    monkeypatch.setenv("FIELDRATE_DATABASE_URL", "sqlite:////var/lib/fr.db")
    monkeypatch.setenv("FIELDRATE_PORT", "9123")
    monkeypatch.setenv("FIELDRATE_ANONYMOUS_READ", "true")
    s = Settings()
    assert (s.database_url, s.port, s.anonymous_read) == ("sqlite:////var/lib/fr.db", 9123, True)
    assert s.max_conditions_per_request >= 100_000
