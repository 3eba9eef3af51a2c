"""Serialisers read back by independent libraries: geopandas/pyogrio (GeoJSON, RFC 7946),
pandas (CSV), netCDF4 via xarray (CF netCDF)."""

from __future__ import annotations

import io
import json

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.formats import export


@pytest.fixture
def point_ds():
    return xr.Dataset({
        "lon": ("point", [10.0, -170.5, 3.0]),
        "lat": ("point", [-5.0, 45.0, 0.0]),
        "inside": ("point", [True, True, False]),
        "shmax_azimuth_deg": ("point", [12.5, 179.0, np.nan]),
        "regime": ("point", ["reverse", "strike-slip", ""]),
    })


@pytest.fixture
def grid_ds():
    lon = np.array([0.0, 1.0, 2.0])
    lat = np.array([10.0, 11.0])
    inside = np.array([[True, False, True], [True, True, False]])
    az = np.where(inside, 30.0, np.nan)
    return xr.Dataset(
        {"inside": (("lat", "lon"), inside), "shmax_azimuth_deg": (("lat", "lon"), az)},
        coords={"lat": ("lat", lat, {"units": "degrees_north"}),
                "lon": ("lon", lon, {"units": "degrees_east"})},
    )


def test_geojson_reads_back_with_geopandas(tmp_path, point_ds):
    import geopandas as gpd

    fc = export.points_geojson(point_ds, [{"well": "A"}, {"well": "B"}, {"well": "C"}],
                               {"caution": CAUTION, "model_id": "m1"})
    path = tmp_path / "out.geojson"
    path.write_text(json.dumps(fc, allow_nan=False))  # RFC 7946/8259: no NaN tokens allowed
    gdf = gpd.read_file(path)
    assert_allclose(gdf.geometry.x, [10.0, -170.5, 3.0])
    assert_allclose(gdf.geometry.y, [-5.0, 45.0, 0.0])
    assert list(gdf["well"]) == ["A", "B", "C"]
    assert gdf["shmax_azimuth_deg"].isna().tolist() == [False, False, True]
    assert fc["caution"] == CAUTION and fc["model_id"] == "m1"


def test_geojson_keeps_clashing_input_properties(point_ds):
    fc = export.points_geojson(point_ds, [{"regime": "mine"}] * 3)
    props = fc["features"][0]["properties"]
    assert props["regime"] == "reverse" and props["input_regime"] == "mine"


def test_grid_geojson_drops_outside_nodes(grid_ds):
    fc = export.grid_geojson(grid_ds)
    coords = sorted(tuple(f["geometry"]["coordinates"]) for f in fc["features"])
    assert coords == [(0.0, 10.0), (0.0, 11.0), (1.0, 11.0), (2.0, 10.0)]


def test_csv_header_first_and_meta_kept_out_of_the_table(point_ds):
    import pandas as pd

    text = export.points_csv(point_ds, {"caution": CAUTION})
    assert text.startswith("lon,lat,") and CAUTION not in text  # the caution goes in the sidecar
    frame = pd.read_csv(io.StringIO(text))
    assert list(frame.columns[:2]) == ["lon", "lat"]
    assert_allclose(frame["shmax_azimuth_deg"][:2], [12.5, 179.0])
    assert frame["inside"].tolist() == [True, True, False]  # pandas reads true/false as booleans


@pytest.mark.parametrize("payload", ["=1+2", "+cmd", "-2+3", "@SUM(A1)", "\t=x"])
def test_csv_neutralises_formula_injection(point_ds, payload):
    # OWASP "CSV Injection": cells starting with = + - @ tab CR are prefixed with a quote.
    text = export.points_csv(point_ds, extra_properties=[{"note": payload}] * 3)
    assert f",'{payload}" in text or f"\"'{payload}\"" in text


def test_netcdf_reads_back_with_xarray(tmp_path, grid_ds):
    data = export.grid_netcdf_bytes(grid_ds, {"caution": CAUTION, "model_id": "m1"})
    path = tmp_path / "g.nc"
    path.write_bytes(data)
    with xr.open_dataset(path, engine="netcdf4") as back:
        assert back.attrs["caution"] == CAUTION
        assert back["inside"].dtype == np.int8 and back["inside"].attrs["flag_meanings"] == "false true"
        assert_allclose(back["shmax_azimuth_deg"].values, grid_ds["shmax_azimuth_deg"].values)


def test_geojson_outside_the_plate_gives_null_regime(point_ds):
    # README: points outside the plate have `inside: false` and null values (JSON null, RFC 8259),
    # the regime included (it was "").
    fc = export.points_geojson(point_ds)
    outside = fc["features"][2]["properties"]
    assert outside["inside"] is False
    assert outside["regime"] is None and outside["shmax_azimuth_deg"] is None
    assert fc["features"][0]["properties"]["regime"] == "reverse"
