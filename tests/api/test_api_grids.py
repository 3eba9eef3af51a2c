"""Uploaded grids as resources (/api/v1/grids) and plate documents that name them by id."""

from __future__ import annotations

import io

import numpy as np
import pytest
import tifffile
import xarray as xr
from service_support import wait_for_job

from stressmap.data.demo_elevation import demo_elevation, demo_gpe_document
from stressmap.formats.grids import raster_netcdf_bytes

API = "/api/v1"


@pytest.fixture
def svc(tmp_path):
    from stressmap_api import create_app

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                      "JOB_EXECUTOR": "thread", "MAX_GRID_CELLS": 200_000})
    yield app, app.test_client()
    app.extensions["stressmap_jobs"].shutdown(wait=True)


@pytest.fixture(scope="module")
def elevation_nc():
    return raster_netcdf_bytes(demo_elevation(0.25))


def test_upload_describe_list_delete(svc, elevation_nc):
    _, client = svc
    resp = client.post(f"{API}/grids?role=elevation&name=demo", data=elevation_nc,
                       content_type="application/x-netcdf")
    assert resp.status_code == 201, resp.json
    meta = resp.json
    assert meta["role"] == "elevation" and meta["units"] == "m" and meta["shape"] == [161, 217]
    assert resp.headers["Location"] == f"{API}/grids/{meta['id']}"
    again = client.post(f"{API}/grids?role=elevation", data=elevation_nc,
                        content_type="application/octet-stream")
    assert again.status_code == 200 and again.json["id"] == meta["id"]
    assert client.get(f"{API}/grids/{meta['id']}").json["value_range"][1] > 2900
    assert [g["id"] for g in client.get(f"{API}/grids").json["grids"]] == [meta["id"]]
    assert client.delete(f"{API}/grids/{meta['id']}").status_code == 204
    gone = client.get(f"{API}/grids/{meta['id']}")
    assert gone.status_code == 404 and gone.mimetype == "application/problem+json"
    assert client.get(f"{API}/grids/..%2Fetc").status_code == 404


def test_geotiff_as_multipart_upload(svc):
    _, client = svc
    keys = (1, 1, 0, 3, 1024, 0, 1, 2, 1025, 0, 1, 1, 2048, 0, 1, 4326)
    buf = io.BytesIO()
    tifffile.imwrite(buf, np.full((20, 30), 35.0, dtype="float32"), extratags=[
        (33550, "d", 3, (1.0, 1.0, 0.0), True), (33922, "d", 6, (0, 0, 0, -40.0, 0.0, 0), True),
        (34735, "H", len(keys), keys, True)])
    resp = client.post(f"{API}/grids?role=crust_thickness&units=km",
                       data={"file": (io.BytesIO(buf.getvalue()), "moho.tif")},
                       content_type="multipart/form-data")
    assert resp.status_code == 201, resp.json
    assert resp.json["bbox"] == [-39.5, -19.5, -10.5, -0.5]


@pytest.mark.parametrize("query, body, field, status", [
    ("", b"CDF\x01", "role", 422),
    ("?role=height", b"CDF\x01", "role", 422),
    ("?role=elevation", b"", "(body)", 422),
    ("?role=elevation", b"<html>not a grid</html>", "elevation", 422),
])
def test_bad_uploads_get_problems(svc, query, body, field, status):
    _, client = svc
    resp = client.post(f"{API}/grids{query}", data=body, content_type="application/octet-stream")
    assert resp.status_code == status and resp.mimetype == "application/problem+json"
    assert resp.json["errors"][0]["field"] == field


def test_too_many_cells_and_too_many_bytes(svc):
    app, client = svc
    big = xr.Dataset({"z": (("lat", "lon"), np.zeros((500, 500)), {"units": "m"})},
                     coords={"lat": np.linspace(-50, 50, 500), "lon": np.linspace(0, 100, 500)})
    resp = client.post(f"{API}/grids?role=elevation", data=bytes(big.to_netcdf()),
                       content_type="application/x-netcdf")
    assert resp.status_code == 422 and "cells" in resp.json["detail"]
    app.config["MAX_CONTENT_LENGTH"] = 1000
    resp = client.post(f"{API}/grids?role=elevation", data=b"CDF\x01" + b"\0" * 5000,
                       content_type="application/x-netcdf")
    assert resp.status_code == 413


def test_build_a_model_that_names_an_uploaded_grid(svc, elevation_nc):
    _, client = svc
    grid_id = client.post(f"{API}/grids?role=elevation", data=elevation_nc,
                          content_type="application/x-netcdf").json["id"]
    doc = demo_gpe_document(grid_id)
    doc["gpe"].pop("elevation_variable")
    doc["mesh"] = {"edge_km": 250.0}
    resp = client.post(f"{API}/models", json=doc)
    assert resp.status_code == 202, resp.json
    done = wait_for_job(lambda u: client.get(u).json, resp.headers["Location"])
    assert done["status"] == "done", done
    summary = client.get(f"{API}/models/{done['result']['model_id']}").json["summary"]
    assert "gpe" in {g["name"] for g in summary["groups"]}


@pytest.mark.parametrize("ref, message", [
    ("/etc/passwd", "reads no server files"),
    ("http://127.0.0.1:1/x.nc", "reads no server files"),
    ("0" * 32, "no uploaded grid"),
])
def test_documents_name_grids_only_by_uploaded_id(svc, ref, message):
    _, client = svc
    doc = demo_gpe_document(ref)
    resp = client.post(f"{API}/models", json=doc)
    assert resp.status_code == 422 and resp.mimetype == "application/problem+json"
    err = resp.json["errors"][0]
    assert err["field"] == "gpe.elevation_grid" and message in err["message"]


def test_a_grid_of_another_role_is_refused(svc, elevation_nc):
    _, client = svc
    grid_id = client.post(f"{API}/grids?role=elevation", data=elevation_nc,
                          content_type="application/x-netcdf").json["id"]
    doc = demo_gpe_document("x")
    doc.pop("gpe")
    doc["ridge_push"] = {"mode": "distributed", "age_source": "grid", "age_grid": grid_id}
    resp = client.post(f"{API}/models", json=doc)
    assert resp.status_code == 422
    assert "holds elevation, not age" in resp.json["errors"][0]["message"]


def test_boundary_forces_say_where_ridge_push_went_with_gpe_ridge_push():
    from stressmap_api.boundary import boundary_forces

    from stressmap.model import build_model

    doc = demo_gpe_document("x")
    doc.pop("gpe")
    doc.pop("provinces")  # an all-oceanic plate: no elevation grid needed
    doc["ridge_push"] = {"mode": "gpe", "age_source": "ridge_distance"}
    doc["mesh"] = {"edge_km": 250.0}
    model = build_model(doc)
    ridges = [f["properties"] for f in boundary_forces(model)["features"]
              if f["properties"]["kind"] == "ridge"]
    assert ridges and all(p["normal_force_n_per_m"] == 0.0 and "GPE" in p["applied_as"]
                          for p in ridges)
