"""POST /api/v1/wells/{analysis}: well screening over HTTP, read back with independent readers."""

import io
import json

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from stressmap.analyses import wells
from stressmap.constants import CAUTION

API = "/api/v1"
SITE = {"site": [5.0, 50.0], "depth_km": 3.0, "regime": "strike-slip", "shmax_azimuth_deg": 30.0,
        "rock": {"ucs_mpa": 60.0}, "planes": ["040/60", "120/80"]}


@pytest.mark.parametrize("analysis", ["profile", "tendency-net", "stress-path", "stability",
                                      "window"])
def test_every_analysis_answers_json_with_the_caution(client, analysis):
    resp = client.post(f"{API}/wells/{analysis}", json=SITE)
    assert resp.status_code == 200, resp.data[:400]
    doc = resp.get_json()
    assert doc["caution"] == CAUTION and "not a well design" in doc["note"]


def test_stability_over_http_equals_the_library(client):
    body = dict(SITE, well={"azimuth_deg": 120.0, "inclination_deg": 40.0})
    doc = client.post(f"{API}/wells/stability", json=body).get_json()
    lib = wells.run_stability(wells.parse_well_request(body))
    assert doc["window"]["lower_mpa"] == pytest.approx(float(lib["window"]["lower_mpa"]))
    assert doc["window"]["upper_mpa"] == pytest.approx(float(lib["window"]["upper_mpa"]))


def test_profile_csv_in_oilfield_units_reads_as_a_table(client):
    body = dict(SITE, units="oilfield", profile={"max_depth_km": 4.0, "count": 41})
    resp = client.post(f"{API}/wells/profile?format=csv", json=body)
    assert resp.status_code == 200 and resp.headers["X-Stressmap-Caution"]
    table = pd.read_csv(io.StringIO(resp.get_data(as_text=True)))   # header on the first line
    assert len(table) == 41 and table["depth_ft"].iloc[-1] == pytest.approx(4000 / 0.3048)
    assert {"sv_psi", "sv_emw_ppg", "shmin_psi", "pp_emw_ppg"} <= set(table.columns)


@pytest.mark.parametrize("analysis", ["profile", "tendency-net", "stress-path", "window"])
def test_pictures_are_pngs(client, analysis):
    resp = client.post(f"{API}/wells/{analysis}", json=dict(SITE, format="png"))
    assert resp.status_code == 200 and resp.mimetype == "image/png"
    image = Image.open(io.BytesIO(resp.data))
    pixels = np.asarray(image.convert("L"))
    assert image.size[0] > 400 and (pixels < 200).mean() > 0.02   # not blank


@pytest.mark.parametrize("body, field", [
    (dict(SITE, rock={"ucs_mpa": 0}), "rock.ucs_mpa"),
    (dict(SITE, well={"inclination_deg": 120}), "well.inclination_deg"),
    (dict(SITE, depth_km=-2), "depth_km"),
    (dict(SITE, units="furlongs"), "units"),
    (dict(SITE, breakout={"width_deg": 200}), "breakout.width_deg"),
    (dict(SITE, shmax_mpa=40.0, shmin_mpa=60.0), None),
])
def test_bad_input_is_a_problem_naming_the_field(client, body, field):
    resp = client.post(f"{API}/wells/stability", json=body)
    assert resp.status_code in (400, 422), resp.data[:300]
    assert resp.mimetype == "application/problem+json"
    if field:
        assert field in {e.get("field") for e in resp.get_json().get("errors", [])}


def test_unknown_analysis_and_format(client):
    resp = client.post(f"{API}/wells/drill", json=SITE)
    assert resp.status_code == 404 and resp.mimetype == "application/problem+json"
    assert client.post(f"{API}/wells/stability?format=png", json=SITE).status_code in (400, 422)


def test_breakout_constraint_sets_shmax(client):
    # the regime sets the first-pass Shmin; the breakout width then bounds SHmax
    body = dict(SITE, breakout={"width_deg": 80.0}, rock={"ucs_mpa": 100.0})
    doc = client.post(f"{API}/wells/breakout", json=body).get_json()
    assert doc["site"]["shmax_mpa"] == pytest.approx(doc["shmax_from_breakout_mpa"])
    assert "breakout" in doc["site"]["sources"]["shmax_mpa"]


def test_stress_path_takes_geojson_fault_traces(client):
    # faults arrive as GeoJSON over HTTP and are read at the edge before the core sees them
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "T", "dip_deg": 60, "dip_direction_deg": "E"},
         "geometry": {"type": "LineString", "coordinates": [[5.0, 50.0], [5.0, 50.05]]}}]}
    r = client.post("/api/v1/wells/stress-path", json={**SITE, "faults": faults})
    assert r.status_code == 200, r.json
    assert "T" in json.dumps(r.json)
    faults["features"][0]["properties"]["dip_deg"] = 120
    r = client.post("/api/v1/wells/stress-path", json={**SITE, "faults": faults})
    assert r.status_code == 422 and r.json["errors"][0]["field"] == "faults.dip_deg"
