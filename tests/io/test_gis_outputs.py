"""Every output read back as a GIS analyst would: GDAL's own command-line tools (ogrinfo,
gdalinfo, gdalsrsinfo; GDAL 3.x vector and raster drivers CSV, GPKG, GeoJSON, netCDF) and a
CF checker from the package registries (IOOS compliance-checker, CF-1.8 suite). Sources: GDAL
driver documentation (CSV: .csvt types CoordX/CoordY, .prj; netCDF: CF grid_mapping and
crs_wkt/spatial_ref), CF conventions 1.8 (sections 2.6, 3.5, 5.6, 9), OGC GeoPackage 1.3.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from gdal_support import gdal_tools, run_tool  # noqa: F401 - gdal_tools is a fixture

from stressmap import CAUTION
from stressmap.cli import main
from stressmap.formats import export
from stressmap.formats.table import GDAL_CSV_OPEN_OPTIONS
from stressmap.model import predict_points

POINTS = "lon,lat,well\n-15.0,-20.0,W1\n-5.0,-12.0,=W2\n100.0,60.0,FAR\n"


def _layers(text: str) -> dict:
    """``{layer: geometry}`` from ``ogrinfo -so FILE`` output (lines ``1: name (Geometry)``)."""
    return dict(re.findall(r"^\d+: (\S+)(?: \(([^)]*)\))?", text, flags=re.M))


def _fields(text: str) -> dict:
    """``{field: type}`` from ``ogrinfo -so -al`` output (lines ``name: Type (w.p)``)."""
    return dict(re.findall(r"^(\w+): (\w+(?:\(\w+\))?) \(", text, flags=re.M))


@pytest.fixture(scope="module")
def pts_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("pts") / "wells.csv"
    path.write_text(POINTS)
    return path


def test_predict_csv_is_a_typed_point_layer(gdal_tools, coarse_demo_dir, pts_csv, tmp_path):
    out = tmp_path / "pred.csv"
    assert main(["predict", str(coarse_demo_dir), "--points", str(pts_csv), "-o", str(out)]) == 0
    text = out.read_text()
    assert text.splitlines()[0].startswith("lon,lat,well,inside,")  # the header is line 1
    assert ",true," in text and ",false," in text and "True" not in text
    assert json.loads(out.with_suffix(".json").read_text())["caution"] == CAUTION
    info = run_tool(gdal_tools, "ogrinfo", "-ro", "-so", "-al", str(out))
    assert "Geometry: Point" in info and "Feature Count: 3" in info
    assert 'GEOGCRS["WGS 84"' in info or 'GEOGCS["WGS 84"' in info or "WGS_1984" in info
    fields = _fields(info)
    assert fields["inside"] == "Integer(Boolean)" and fields["s_hmax_mpa"] == "Real"
    assert fields["regime"] == "String" and fields["well"] == "String"


def test_csv_body_without_sidecars_opens_with_the_documented_options(gdal_tools, coarse_demo_model,
                                                                      tmp_path):
    ds = predict_points(coarse_demo_model, [-15.0, -5.0], [-20.0, -12.0])
    path = tmp_path / "body.csv"  # as an HTTP client saves it: no .csvt, no .prj
    path.write_text(export.points_csv(ds))
    opts = [a for o in GDAL_CSV_OPEN_OPTIONS for a in ("-oo", o)]
    info = run_tool(gdal_tools, "ogrinfo", "-ro", "-so", "-al", *opts, str(path))
    assert "Geometry: Point" in info and "Feature Count: 2" in info
    fields = _fields(info)
    assert fields["s_hmax_mpa"] == "Real" and "lon" not in fields  # lon/lat became the geometry


def _cf_check(path: Path, tmp_path: Path) -> dict:
    """The IOOS compliance-checker's CF-1.8 report (its own command, JSON output)."""
    report = tmp_path / (path.stem + "-cf.json")
    checker = Path(sys.executable).with_name("cchecker.py")
    subprocess.run([str(checker), "--test=cf:1.8", "--format", "json", "-o", str(report),
                    str(path)], capture_output=True, timeout=300)
    return json.loads(report.read_text())["cf:1.8"]


def _failures(report: dict, level: str) -> list[str]:
    return [f"{r['name']}: {r['msgs']}" for r in report[level] if r["value"][0] < r["value"][1]]


def test_grid_netcdf_is_cf_and_gdal_complete(gdal_tools, coarse_demo_dir, tmp_path):
    out = tmp_path / "grid.nc"
    assert main(["predict", str(coarse_demo_dir), "--bbox=-37,-37,9,-3", "--spacing-km", "300",
                 "-o", str(out)]) == 0
    report = _cf_check(out, tmp_path)
    assert _failures(report, "high_priorities") == [] and _failures(report, "medium_priorities") == []
    # the CRS: a sphere of radius 6371 km, as the mechanics uses (README conventions)
    srs = run_tool(gdal_tools, "gdalsrsinfo", "-o", "proj4", f"NETCDF:{out}:s_hmax_mpa")
    assert "+proj=longlat" in srs and "+R=6371000" in srs
    regime = run_tool(gdal_tools, "gdalinfo", f"NETCDF:{out}:regime")
    assert "Type=Byte" in regime and "flag_meanings=normal strike_slip reverse" in regime
    with xr.open_dataset(out, decode_cf=False) as raw:
        assert "_FillValue" not in raw["lat"].attrs and "_FillValue" not in raw["lon"].attrs
        assert raw["s_hmax_mpa"].attrs["grid_mapping"] == "crs"
        assert raw["crs"].attrs["grid_mapping_name"] == "latitude_longitude"
        assert raw["crs"].attrs["earth_radius"] == 6371000.0
        assert raw["regime"].dtype == np.int8
        assert raw.attrs["caution"] == CAUTION and raw.attrs["Conventions"] == "CF-1.8"


def test_ensemble_netcdf_has_one_band_per_percentile(gdal_tools, coarse_demo_dir, tmp_path):
    out = tmp_path / "ens.nc"
    assert main(["ensemble", str(coarse_demo_dir), "--bbox=-30,-30,-5,-5", "--spacing-km", "500",
                 "--members", "30", "--vary", "collision=uniform:0.5:1.5", "-o", str(out)]) == 0
    info = run_tool(gdal_tools, "gdalinfo", f"NETCDF:{out}:s_hmax_mpa")
    assert len(re.findall(r"^Band \d+ ", info, flags=re.M)) == 3  # percentiles 5, 50, 95
    with xr.open_dataset(out) as ds:
        assert ds["s_hmax_mpa"].dims == ("percentile", "lat", "lon")
        size = re.search(r"Size is (\d+), (\d+)", info).groups()
        assert (int(size[0]), int(size[1])) == (ds.sizes["lon"], ds.sizes["lat"])
    report = _cf_check(out, tmp_path)
    assert _failures(report, "high_priorities") == [] and _failures(report, "medium_priorities") == []
    table = tmp_path / "ens.csv"  # the same grid as a table: inside is a boolean again
    assert main(["ensemble", str(coarse_demo_dir), "--bbox=-30,-30,-5,-5", "--spacing-km", "500",
                 "--members", "30", "-o", str(table)]) == 0
    fields = _fields(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", "-al", str(table)))
    assert fields["inside"] == "Integer(Boolean)" and fields["s_hmax_mpa_p95"] == "Real"


def test_geopackage_outputs_have_named_layers_of_one_kind(gdal_tools, coarse_demo_dir, pts_csv,
                                                          tmp_path, capsys):
    pred = tmp_path / "wells.gpkg"
    assert main(["predict", str(coarse_demo_dir), "--points", str(pts_csv), "-o", str(pred)]) == 0
    assert _layers(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", str(pred))) == {"wells": "Point"}
    info = run_tool(gdal_tools, "ogrinfo", "-ro", "-so", "-al", str(pred))
    assert "Feature Count: 3" in info and _fields(info)["inside"] == "Integer(Boolean)"
    demo = Path(__file__).resolve().parents[2] / "stressmap" / "data" / "demo_indicators.csv"
    cmp_dir = tmp_path / "cmp"
    assert main(["compare", str(coarse_demo_dir), str(demo), "-o", str(cmp_dir),
                 "--no-pictures"]) == 0
    layers = _layers(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", str(cmp_dir / "indicators.gpkg")))
    assert layers == {"indicators": "Point"}
    ens = tmp_path / "spread.gpkg"
    assert main(["ensemble", str(coarse_demo_dir), "--points", str(pts_csv), "--members", "20",
                 "-o", str(ens)]) == 0
    assert _layers(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", str(ens))) == {"spread": "Point"}
    faults = tmp_path / "faults.geojson"
    faults.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "F1", "dip_deg": 60, "dip_direction_deg": "E"},
         "geometry": {"type": "LineString", "coordinates": [[-15.0, -19.9], [-15.0, -20.1]]}}]}))
    scr = tmp_path / "screen.gpkg"
    assert main(["screen", "--site=-15.0,-20.0", "--depth-km", "3", "--shmax-azimuth-deg", "40",
                 "--regime", "normal", "--plane", "040/60", "--faults", str(faults),
                 "--gpkg", str(scr)]) == 0
    assert _layers(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", str(scr))) == {
        "traces": "Line String", "planes": "Point", "sites": "Point"}
    capsys.readouterr()


def test_geojson_layer_is_named_and_rounded(gdal_tools, coarse_demo_dir, pts_csv, tmp_path):
    out = tmp_path / "wells.geojson"
    assert main(["predict", str(coarse_demo_dir), "--points", str(pts_csv), "-o", str(out)]) == 0
    assert _layers(run_tool(gdal_tools, "ogrinfo", "-ro", "-so", str(out))) == {"wells": "Point"}
    doc = json.loads(out.read_text())
    for feat in doc["features"]:
        for c in feat["geometry"]["coordinates"]:
            assert round(c, 6) == c  # 1e-6 degree (README)
        for v in feat["properties"].values():
            if isinstance(v, float) and v:
                assert float(f"{v:.7g}") == v  # 7 significant digits (README)


def _with_nulls(tmp_path: Path, suffix: str) -> Path:
    """Points whose attributes hold nulls (as an earlier output's outside points do)."""
    import geopandas as gpd
    from shapely.geometry import Point

    gdf = gpd.GeoDataFrame({"well": ["A", None, "C"], "depth": [1.5, None, np.nan]},
                           geometry=[Point(-15, -20), Point(-5, -12), Point(100, 60)],
                           crs="EPSG:4326")
    path = tmp_path / f"in{suffix}"
    gdf.to_file(path)
    return path


@pytest.mark.parametrize("suffix", [".geojson", ".gpkg", ".shp"])
@pytest.mark.parametrize("command", ["predict", "ensemble"])
def test_null_properties_are_echoed_as_null(coarse_demo_dir, tmp_path, suffix, command, capsys):
    src = _with_nulls(tmp_path, suffix)
    out = tmp_path / "out.geojson"
    extra = ["--members", "10"] if command == "ensemble" else []
    assert main([command, str(coarse_demo_dir), "--points", str(src), *extra, "-o", str(out)]) == 0
    capsys.readouterr()
    props = [f["properties"] for f in json.loads(out.read_text())["features"]]
    assert [p["well"] for p in props] == ["A", None, "C"]
    assert props[0]["depth"] == 1.5 and props[1]["depth"] is None and props[2]["depth"] is None
    # feeding the output back in (it holds nulls for the outside point) works too
    again = tmp_path / "again.geojson"
    assert main([command, str(coarse_demo_dir), "--points", str(out), *extra, "-o",
                 str(again)]) == 0
