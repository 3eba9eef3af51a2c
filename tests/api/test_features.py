"""OGC API - Features (Part 1: Core) under /api/v1/features.

Against the standard (OGC 17-069r4, from memory: landing page links service-desc/conformance/
data; /conformance lists the classes; items carry numberMatched/numberReturned and next/prev
links; invalid query parameters answer 400) through the Flask client, and with a real client:
GDAL's OAPIF driver (``ogrinfo OAPIF:...``) against a running `stressmap serve`.
"""

from __future__ import annotations

import os
import queue
import re
import signal
import subprocess
import sys
import threading
import time
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from gdal_support import gdal_tools, run_tool  # noqa: F401 - gdal_tools is a fixture
from service_support import store_ready_model

from stressmap import CAUTION

API = "/api/v1"
CORE = "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/core"
GEOJSON = "http://www.opengis.net/spec/ogcapi-features-1/1.0/conf/geojson"
DEMO_CSV = resources.files("stressmap.data").joinpath("demo_indicators.csv").read_text("utf-8")


@pytest.fixture(scope="module")
def served(tmp_path_factory, coarse_demo_model):
    from stressmap_api import create_app
    from stressmap_api.store import get_store

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path_factory.mktemp("oapif") / "data"),
                      "JOB_EXECUTOR": "thread", "FEATURES_FIELD_SPACING_KM": 250.0,
                      "API_TOKEN": "t0ken"})
    with app.app_context():
        model_id = store_ready_model(get_store(), coarse_demo_model)
    yield app, app.test_client(), model_id
    app.extensions["stressmap_jobs"].shutdown()


def _all_pages(client, url):
    """Follow next links; every page's features, and the first page."""
    first = page = client.get(url).json
    feats = list(page["features"])
    for _ in range(1000):  # bounded
        nxt = [link["href"] for link in page["links"] if link["rel"] == "next"]
        if not nxt:
            return feats, first
        page = client.get(nxt[0].removeprefix("http://localhost")).json
        assert any(link["rel"] == "prev" for link in page["links"])
        feats += page["features"]
    raise AssertionError("paging did not end")


def test_landing_and_conformance(served):
    _, client, _ = served
    landing = client.get(f"{API}/features").json
    rels = {link["rel"]: link["href"] for link in landing["links"]}
    assert {"self", "service-desc", "service-doc", "conformance", "data"} <= set(rels)
    assert client.get(rels["service-desc"].removeprefix("http://localhost")).json["openapi"]
    assert {CORE, GEOJSON} <= set(client.get(f"{API}/features/conformance").json["conformsTo"])


def test_collections_per_ready_model(served):
    _, client, model_id = served
    cols = {c["id"]: c for c in client.get(f"{API}/features/collections").json["collections"]}
    assert {f"{model_id}-outline", f"{model_id}-boundary", f"{model_id}-field"} <= set(cols)
    field = cols[f"{model_id}-field"]
    assert field["spacing_km"] == 250.0 and "250 km" in field["description"]
    assert CAUTION in field["description"]
    w, s, e, n = field["extent"]["spatial"]["bbox"][0]
    assert -40 < w < e < 15 and -40 < s < n < 0  # the fictional demo plate's extent
    items = [link for link in field["links"] if link["rel"] == "items"][0]
    assert items["type"] == "application/geo+json"


def test_items_page_and_filter_by_bbox(served):
    _, client, model_id = served
    url = f"{API}/features/collections/{model_id}-field/items"
    whole = client.get(url + "?limit=10000").json
    assert whole["numberMatched"] == whole["numberReturned"] == len(whole["features"]) > 20
    feats, first = _all_pages(client, url + "?limit=7")
    assert first["numberReturned"] == 7 and first["numberMatched"] == whole["numberMatched"]
    assert [f["id"] for f in feats] == [f["id"] for f in whole["features"]]  # no gap, no repeat
    xy = np.array([f["geometry"]["coordinates"] for f in whole["features"]])
    inside = (xy[:, 0] >= -20) & (xy[:, 0] <= -5) & (xy[:, 1] >= -25) & (xy[:, 1] <= -10)
    box = client.get(url + "?bbox=-20,-25,-5,-10&limit=10000").json
    assert box["numberMatched"] == int(inside.sum()) > 0
    props = box["features"][0]["properties"]
    assert {"shmax_azimuth_deg", "regime", "s_hmax_mpa", "s_hmin_mpa"} <= set(props)
    assert client.get(url + "?bbox=-20,-25,-5,-10&limit=10000&f=json").json["numberMatched"] == \
        box["numberMatched"]
    one = client.get(f"{url}/{box['features'][0]['id']}")
    assert one.status_code == 200 and one.json["id"] == box["features"][0]["id"]


def test_outline_and_boundary(served):
    _, client, model_id = served
    outline = client.get(f"{API}/features/collections/{model_id}-outline/items").json
    ring = outline["features"][0]["geometry"]["coordinates"][0]
    assert outline["features"][0]["geometry"]["type"] == "Polygon" and ring[0] == ring[-1]
    seg = client.get(f"{API}/features/collections/{model_id}-boundary/items").json["features"]
    assert all(f["geometry"]["type"] == "LineString" for f in seg)
    assert {"kind", "group", "normal_force_n_per_m"} <= set(seg[0]["properties"])


@pytest.mark.parametrize("query, field", [("limit=0", "limit"), ("limit=x", "limit"),
                                          ("offset=-1", "offset"), ("bbox=1,2,3", "bbox"),
                                          ("bbox=0,10,5,5", "bbox"), ("colour=red", "colour"),
                                          ("f=html", "f")])
def test_bad_query_parameters_are_400(served, query, field):
    _, client, model_id = served
    resp = client.get(f"{API}/features/collections/{model_id}-field/items?{query}")
    assert resp.status_code == 400 and resp.mimetype == "application/problem+json"
    assert resp.json["errors"][0]["field"] == field


def test_unknown_collections_and_features_are_404(served):
    _, client, model_id = served
    for url in ("/features/collections/nope", f"/features/collections/{model_id}-mesh",
                f"/features/collections/{'0' * 32}-field/items",
                f"/features/collections/{model_id}-outline/items/nope"):
        assert client.get(API + url).status_code == 404


def test_stored_indicators_are_served_with_their_misfit(served):
    _, client, model_id = served
    url = f"{API}/models/{model_id}/indicators"
    assert client.put(url, json={"indicators_csv": DEMO_CSV}).status_code == 401  # token needed
    auth = {"Authorization": "Bearer t0ken"}
    bad = client.put(url, json={"indicators_csv": "id,lon,lat,type,azimuth_deg\nA,1,95,breakout,10\n"},
                     headers=auth)
    assert bad.status_code == 422 and bad.json["errors"][0]["row"] == 1
    resp = client.put(url, json={"indicators_csv": DEMO_CSV}, headers=auth)
    assert resp.status_code == 200 and resp.json["count"] == 320
    items = client.get(f"{API}/features/collections/{model_id}-indicators/items?limit=10000").json
    assert items["numberMatched"] == 320
    p = [f["properties"] for f in items["features"] if f["properties"]["inside"]]
    obs = np.array([q["shmax_azimuth_deg"] for q in p if q["misfit_deg"] is not None], float)
    pred = np.array([q["predicted_shmax_azimuth_deg"] for q in p if q["misfit_deg"] is not None])
    mis = np.array([q["misfit_deg"] for q in p if q["misfit_deg"] is not None])
    # misfit = observed - predicted, wrapped into [-90, 90) (axial data; README)
    np.testing.assert_allclose(mis, (obs - pred + 90.0) % 180.0 - 90.0, atol=2e-4)


# -- a real OGC API - Features client: GDAL's OAPIF driver against a running server ----------

class _Server:
    """`stressmap serve --port 0` in its own process group, on 127.0.0.1."""

    def __init__(self, data_dir: Path, **env):
        environ = dict(os.environ, STRESSMAP_DATA_DIR=str(data_dir), STRESSMAP_JOB_WORKERS="1",
                       **{f"STRESSMAP_{k}": str(v) for k, v in env.items()})
        environ.pop("STRESSMAP_API_TOKEN", None)
        self.proc = subprocess.Popen([str(Path(sys.executable).with_name("stressmap")), "serve",
                                      "--port", "0"], stdout=subprocess.PIPE,
                                     stderr=subprocess.STDOUT, text=True, env=environ,
                                     start_new_session=True)
        lines: queue.Queue = queue.Queue()
        self.pump = threading.Thread(target=lambda: [lines.put(x) for x in self.proc.stdout],
                                     daemon=True)
        self.pump.start()
        deadline, seen, self.base = time.monotonic() + 120, [], None
        while self.base is None:
            try:
                line = lines.get(timeout=max(deadline - time.monotonic(), 0.01))
            except queue.Empty:
                self.stop()
                raise AssertionError("server did not start: " + "".join(seen)) from None
            seen.append(line)
            m = re.search(r"listening on (http://127\.0\.0\.1:\d+)", line)
            self.base = m.group(1) if m else None

    def stop(self):
        if self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=30)
        self.pump.join(timeout=10)
        self.proc.stdout.close()


@pytest.mark.server
def test_gdal_oapif_driver_lists_pages_and_filters(gdal_tools, coarse_demo_model, tmp_path):
    import httpx

    from stressmap_api.store import Store

    data = tmp_path / "data"
    model_id = store_ready_model(Store(data), coarse_demo_model)
    server = _Server(data, FEATURES_FIELD_SPACING_KM=250)
    try:
        http = httpx.Client(base_url=server.base + API, timeout=60.0)
        assert http.put(f"/models/{model_id}/indicators",
                        json={"indicators_csv": DEMO_CSV}).status_code == 200
        url = f"OAPIF:{server.base}{API}/features"
        listing = run_tool(gdal_tools, "ogrinfo", "-ro", "-so", url)
        layers = set(re.findall(r"^\d+: (\S+)", listing, flags=re.M))
        assert layers == {f"{model_id}-{k}" for k in ("outline", "boundary", "field", "indicators")}
        field = f"{model_id}-field"
        whole = http.get(f"/features/collections/{field}/items", params={"limit": 10000}).json()
        # paging: GDAL follows the next links with a page size of 10
        text = run_tool(gdal_tools, "ogrinfo", "-ro", "-al", "-q", "-oo", "PAGE_SIZE=10", url, field)
        assert text.count("OGRFeature(") == whole["numberMatched"] > 10
        assert "shmax_azimuth_deg (Real)" in text and "regime (String)" in text
        # bbox: GDAL sends the spatial filter as bbox
        box = http.get(f"/features/collections/{field}/items",
                       params={"bbox": "-20,-25,-5,-10", "limit": 10000}).json()
        text = run_tool(gdal_tools, "ogrinfo", "-ro", "-al", "-q", "-spat", "-20", "-25", "-5",
                        "-10", url, field)
        assert text.count("OGRFeature(") == box["numberMatched"] > 0
        text = run_tool(gdal_tools, "ogrinfo", "-ro", "-al", "-q", url, f"{model_id}-indicators")
        assert text.count("OGRFeature(") == 320 and "misfit_deg (Real)" in text
        http.close()
    finally:
        server.stop()
