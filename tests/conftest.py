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


@pytest.fixture(scope="session")
def coarse_demo_model():
    """The fictional demo plate built on a coarse (250 km) mesh, once per test session."""
    import copy
    import json
    from importlib import resources

    from stressmap.model import build_model

    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json")
                     .read_text(encoding="utf-8"))
    doc = copy.deepcopy(doc)
    doc["mesh"] = {"edge_km": 250.0}
    return build_model(doc)


@pytest.fixture(scope="session")
def coarse_demo_dir(coarse_demo_model, tmp_path_factory):
    """Directory of the coarse demo model written with stressmap.io.modeldir.write_model."""
    from stressmap.io.modeldir import write_model

    path = tmp_path_factory.mktemp("coarse-demo") / "model"
    write_model(coarse_demo_model, path)
    return path
