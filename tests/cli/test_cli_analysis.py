"""``stressmap calibrate`` and ``stressmap ensemble`` on the coarse fictional demo model.

Indicators are generated from the model's own prediction with known weights (stressmap.model
.predict_points) plus known noise, so the expected answer is known; outputs are read back with
independent readers (json, xarray/netCDF4, PNG signature per the PNG specification).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import xarray as xr
from numpy.testing import assert_allclose

from stressmap import CAUTION
from stressmap.cli import main

TRUTH = {"collision": 0.5, "subduction": 2.0}


@pytest.fixture(scope="module")
def indicator_csv(coarse_demo_model, tmp_path_factory):
    from stressmap.model import predict_points

    rng = np.random.default_rng(5)
    lon, lat = rng.uniform(-30, 0, 150), rng.uniform(-32, -6, 150)
    pred = predict_points(coarse_demo_model, lon, lat, weights=TRUTH)
    az = np.mod(pred["shmax_azimuth_deg"].values + rng.normal(0, 6.0, lon.size), 180)
    keep = pred["inside"].values
    rows = ["id,lon,lat,type,azimuth_deg,sigma_deg"]
    rows += [f"S{i},{x:.5f},{y:.5f},overcoring,{a:.3f},6" for i, (x, y, a)
             in enumerate(zip(lon[keep], lat[keep], az[keep]))]
    path = tmp_path_factory.mktemp("ind") / "indicators.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_calibrate_json(coarse_demo_dir, indicator_csv, capsys):
    code = main(["calibrate", str(coarse_demo_dir), str(indicator_csv), "--json",
                 "--bootstrap", "40", "--random", "10", "--reference", "ridge",
                 "--bounds", ",".join(f"{g}=0:4" for g in ("transform", "collision",
                                                            "overriding", "subduction"))])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    assert out["caution"] == CAUTION
    assert set(out["weights"]) == set(out["weights_ci"]) == {
        "transform", "ridge", "collision", "overriding", "subduction"}
    assert out["misfit_after"] < out["misfit_before"]
    assert_allclose(out["misfit_after"], 6.0 * np.sqrt(2 / np.pi), rtol=0.35)  # half-normal mean
    assert_allclose(out["weights"]["collision"], TRUTH["collision"], atol=0.2)
    assert out["weights"]["ridge"] == 1.0 and out["weights_ci"]["ridge"] == [1.0, 1.0]


def test_calibrate_text_and_config(coarse_demo_dir, indicator_csv, tmp_path, capsys):
    cfg = tmp_path / "settings.toml"
    cfg.write_text('[calibration]\nreference = "ridge"\nn_bootstrap = 20\nn_random = 0\n'
                   '[calibration.bounds]\ncollision = [0.0, 0.3]\n', encoding="utf-8")
    assert main(["calibrate", str(coarse_demo_dir), str(indicator_csv), "--config", str(cfg)]) == 0
    text = capsys.readouterr().out
    assert "reference (fixed)" in text and "misfit before" in text and CAUTION in text
    assert "[0, 0.3]" in text   # bounds from the settings file


def test_calibrate_bad_bounds_is_a_clear_error(coarse_demo_dir, indicator_csv, capsys):
    code = main(["calibrate", str(coarse_demo_dir), str(indicator_csv), "--bounds", "nope=0:1",
                 "--bootstrap", "0", "--random", "0"])
    assert code == 2
    err = capsys.readouterr().err
    assert "bounds.nope" in err and "unknown load group" in err


def test_calibrate_missing_model_dir(tmp_path, indicator_csv, capsys):
    assert main(["calibrate", str(tmp_path / "none"), str(indicator_csv)]) == 2
    assert "model directory not found" in capsys.readouterr().err


@pytest.fixture(scope="module")
def points_csv(tmp_path_factory):
    path = tmp_path_factory.mktemp("pts") / "sites.csv"
    path.write_text("name,lon,lat\nA,-20,-20\nB,-10,-15\nC,60,10\n", encoding="utf-8")
    return path


def test_ensemble_points_geojson(coarse_demo_dir, points_csv, tmp_path, capsys):
    out = tmp_path / "ens.geojson"
    code = main(["ensemble", str(coarse_demo_dir), "--points", str(points_csv), "--members",
                 "300", "--vary", "collision=log-uniform:0.3:3", "--vary",
                 "subduction.pull_fraction=uniform:0.06:0.24", "-o", str(out)])
    assert code == 0
    assert "ensemble of 300 members over 3 points (2 inside the plate)" in capsys.readouterr().out
    doc = json.loads(out.read_text())
    assert doc["caution"] == CAUTION and doc["members"] == 300
    props = [f["properties"] for f in doc["features"]]
    assert props[0]["name"] == "A"
    p = props[0]
    assert_allclose(p["prob_normal"] + p["prob_strike_slip"] + p["prob_reverse"], 1.0)
    assert p["s_hmax_mpa_p5"] <= p["s_hmax_mpa_p50"] <= p["s_hmax_mpa_p95"]
    assert props[2]["shmax_azimuth_deg"] is None   # outside the plate


def test_ensemble_grid_netcdf_and_png(coarse_demo_dir, tmp_path, capsys):
    nc = tmp_path / "ens.nc"
    png = tmp_path / "ens.png"
    args = ["ensemble", str(coarse_demo_dir), "--bbox=-30,-30,-5,-5", "--spacing-km", "500",
            "--members", "50", "--vary", "collision=uniform:0.5:1.5", "--seed", "4"]
    assert main(args + ["-o", str(nc)]) == 0
    assert main(args + ["-o", str(png)]) == 0
    capsys.readouterr()
    with xr.open_dataset(nc) as ds:
        assert ds.attrs["caution"] == CAUTION
        assert ds["s_hmax_mpa"].dims == ("percentile", "lat", "lon")  # one raster band per percentile
        assert list(ds["percentile"].values) == [5.0, 50.0, 95.0]
        assert ds.sizes["member"] == 50
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"   # PNG signature (PNG spec, section 5.2)


def test_ensemble_bad_output_and_distribution(coarse_demo_dir, points_csv, tmp_path, capsys):
    assert main(["ensemble", str(coarse_demo_dir), "--points", str(points_csv), "--members", "5",
                 "-o", str(tmp_path / "x.txt")]) == 2
    assert main(["ensemble", str(coarse_demo_dir), "--points", str(points_csv), "--members", "5",
                 "--vary", "collision=gamma:1:2", "-o", str(tmp_path / "x.nc")]) == 2
    err = capsys.readouterr().err
    assert "distributions.collision.distribution" in err


def test_ensemble_without_vary_says_which_defaults_it_varied(coarse_demo_dir, tmp_path, capsys):
    # The README example `ensemble ... --members 2000 -o spread.png` gives no distribution: the
    # members used to be identical (spread 0). Now the documented defaults vary and it says so.
    nc = tmp_path / "ens.nc"
    assert main(["ensemble", str(coarse_demo_dir), "--bbox=-30,-30,-5,-5", "--spacing-km", "500",
                 "--members", "40", "-o", str(nc)]) == 0
    out = capsys.readouterr().out
    assert "note: distributions: default" in out and "0.5 to 1.5" in out
    with xr.open_dataset(nc) as ds:
        inside = ds["inside"].values.astype(bool)
        assert np.nanmax(ds["shmax_std_deg"].values[inside]) > 0
        assert json.loads(ds.attrs["distributions"])


def test_ensemble_regime_probability_map(coarse_demo_dir, tmp_path, capsys):
    """--regime-png draws P(normal), P(strike-slip), P(reverse) from the same members as the
    netCDF; decoded with Pillow, each panel's cells carry the colour of their probability."""
    import matplotlib
    import numpy as np
    from PIL import Image

    nc, png = tmp_path / "ens.nc", tmp_path / "regimes.png"
    args = ["ensemble", str(coarse_demo_dir), "--bbox=-30,-30,-5,-5", "--spacing-km", "500",
            "--members", "60", "--vary", "collision=log-uniform:0.2:5", "--seed", "2"]
    assert main(args + ["-o", str(nc), "--regime-png", str(png)]) == 0
    assert "regime probability map" in capsys.readouterr().out
    img = np.asarray(Image.open(png).convert("RGB"), dtype=float) / 255.0
    assert img.shape[1] > 2 * img.shape[0]  # three map panels side by side
    img = img[:, : int(0.85 * img.shape[1])]  # the panels only, not the colourbar
    cmap = matplotlib.colormaps["magma_r"]
    with xr.open_dataset(nc) as ds:
        for var in ("prob_normal", "prob_strike_slip", "prob_reverse"):
            values = ds[var].values[np.isfinite(ds[var].values)]
            for v in np.unique(np.round(values, 2))[:3]:
                share = (np.abs(img - np.asarray(cmap(v)[:3])).max(axis=-1) < 0.03).mean()
                assert share > 1e-4, (var, v)
