"""Shared fixtures: a fresh app and client per test (Flask tutorial pattern), temp data dirs."""

from __future__ import annotations

import pytest


@pytest.fixture
def app(tmp_path):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "LOAD_DEMO": False})
    yield app
    app.extensions["stressmap_jobs"].shutdown()  # end the app's worker pool (service owner: V)


@pytest.fixture
def client(app):
    return app.test_client()
