"""The application factory: configuration precedence and wiring (Flask tutorial shape)."""

from __future__ import annotations

import pytest

from service import create_app


def test_default_config_is_not_testing(tmp_path):
    app = create_app({"DATABASE_URL": "sqlite:///" + str(tmp_path / "a.sqlite3")})
    assert not app.testing
    assert app.config["MAX_POINTS"] == 20_001


def test_testing_flag_from_mapping(app):
    assert app.testing


def test_environment_variables_override_defaults(monkeypatch, tmp_path):
    # Flask's from_prefixed_env JSON-parses values: "5001" becomes the integer 5001.
    monkeypatch.setenv("EMF_MAX_POINTS", "5001")
    monkeypatch.setenv("EMF_DATABASE_URL", "sqlite:///" + str(tmp_path / "env.sqlite3"))
    app = create_app()
    assert app.config["MAX_POINTS"] == 5001
    assert app.config["DATABASE_URL"].endswith("env.sqlite3")


def test_mapping_overrides_environment_and_accepts_prefix(monkeypatch):
    monkeypatch.setenv("EMF_MAX_POINTS", "5001")
    app = create_app({"EMF_MAX_POINTS": 11, "EMF_DATABASE_URL": "sqlite://"})
    assert app.config["MAX_POINTS"] == 11


def test_default_database_is_sqlite_file_in_instance_folder(tmp_path):
    from service.storage import database_url

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://"})
    app.config["DATABASE_URL"] = None
    app.instance_path = str(tmp_path / "instance")
    url = database_url(app)
    assert url.startswith("sqlite:///") and url.endswith("instance/emf-assess.sqlite3")
    assert (tmp_path / "instance").is_dir()


@pytest.mark.parametrize("key, value", [("MAX_POINTS", 0), ("MAX_CONDUCTORS", "many"), ("PAGE_SIZE_MAX", -1)])
def test_bad_settings_fail_fast(key, value):
    with pytest.raises(ValueError, match=key):
        create_app({"DATABASE_URL": "sqlite://", key: value})


def test_healthz_pings_database(client):
    response = client.get("/healthz")
    assert response.status_code == 200
    assert response.get_json() == {"status": "ok", "database": "ok"}
    assert response.headers["X-Request-Id"]


def test_healthz_reports_unreachable_database(app, client):
    from sqlalchemy import create_engine
    from sqlalchemy.orm import sessionmaker

    # A database file inside a directory that does not exist cannot be opened.
    broken = create_engine("sqlite:////nonexistent-dir/x/y.sqlite3")
    app.extensions["emf_storage"].sessionmaker = sessionmaker(broken)
    response = client.get("/healthz")
    assert response.status_code == 503
    assert response.mimetype == "application/problem+json"
