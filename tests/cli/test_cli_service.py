"""`stressmap demo` and the server settings of `stressmap serve` (stressmap/cli/service.py).

The demo's outputs are read back with geopandas (GeoJSON), xarray (netCDF) and Pillow (PNG).
`stressmap serve` itself is exercised end to end in tests/test_server.py.
"""

from __future__ import annotations

import json
import os

import numpy as np

from stressmap import CAUTION
from stressmap.cli import main
from stressmap.cli.service import SERVER_DEFAULTS, load_server_config


def test_demo_writes_grid_geojson_netcdf_and_png(tmp_path, capsys):
    import geopandas
    import xarray as xr
    from PIL import Image

    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "--spacing-km", "400"]) == 0
    printed = capsys.readouterr().out
    assert "fictional" in printed and CAUTION in printed

    doc = json.loads((out / "demo_grid.geojson").read_text())
    assert doc["caution"] == CAUTION and "fictional" in doc["model_name"]
    assert len(doc["model_id"]) == 32 and doc["build_time"].endswith("Z")
    frame = geopandas.read_file(out / "demo_grid.geojson")
    assert len(frame) > 20 and frame["inside"].all()
    assert frame["regime"].isin(["normal", "strike-slip", "reverse"]).all()

    with xr.open_dataset(out / "demo_grid.nc", engine="netcdf4") as ds:
        assert ds.attrs["caution"] == CAUTION and ds.attrs["model_id"] == doc["model_id"]
        inside = ds["inside"].values.astype(bool)
        assert inside.sum() == len(frame)
        az = ds["shmax_azimuth_deg"].values[inside]
        assert np.all((az >= 0) & (az < 180))

    img = Image.open(out / "demo_map.png")
    assert img.format == "PNG" and img.width > 500
    assert len(np.unique(np.asarray(img.convert("RGB")).reshape(-1, 3), axis=0)) > 200
    assert (out / "model" / "fields.nc").is_file()  # usable by `stressmap predict`


def test_demo_refuses_a_bad_spacing(tmp_path, capsys):
    assert main(["demo", "-o", str(tmp_path / "x"), "--spacing-km", "-1"]) == 2
    assert "--spacing-km" in capsys.readouterr().err


def test_server_settings_come_from_config_and_file(tmp_path, monkeypatch):
    monkeypatch.delenv("STRESSMAP_SERVER_CONFIG", raising=False)
    monkeypatch.delenv("STRESSMAP_PORT", raising=False)
    repo = load_server_config()
    assert repo["host"] == "127.0.0.1" and repo["port"] == 8000  # the README's address
    assert repo["max_request_body_size"] > 16 * 1024 * 1024  # the service answers 413 first
    custom = tmp_path / "server.toml"
    custom.write_text('[server]\nport = 9123\nthreads = 2\n')
    cfg = load_server_config(str(custom))
    assert cfg["port"] == 9123 and cfg["threads"] == 2 and cfg["host"] == SERVER_DEFAULTS["host"]
    monkeypatch.setenv("STRESSMAP_SERVER_CONFIG", str(custom))
    assert load_server_config()["port"] == 9123


def test_missing_server_config_is_a_clear_error(tmp_path, capsys):
    assert main(["serve", "--server-config", str(tmp_path / "nope.toml")]) == 2
    assert "server configuration not found" in capsys.readouterr().err


def test_port_from_the_environment(tmp_path, monkeypatch):
    monkeypatch.delenv("STRESSMAP_SERVER_CONFIG", raising=False)
    monkeypatch.setenv("STRESSMAP_PORT", "8765")
    assert load_server_config()["port"] == 8765
    custom = tmp_path / "server.toml"
    custom.write_text('[server]\nport = 9123\n')
    assert load_server_config(str(custom))["port"] == 8765  # the environment wins over files


def test_port_from_the_environment_must_be_a_port(monkeypatch, capsys):
    monkeypatch.setenv("STRESSMAP_PORT", "80x")
    assert main(["serve"]) == 2
    err = capsys.readouterr().err
    assert "STRESSMAP_PORT" in err and "'80x'" in err


def test_make_serve_passes_the_port(tmp_path):
    """`make serve PORT=...` hands the port to `stressmap serve` (GNU make's dry run)."""
    import shutil
    import subprocess
    from pathlib import Path

    if shutil.which("make") is None:  # CI installs make with the repository's own Makefile
        subprocess.run(["apt-get", "update"], check=True, capture_output=True)
        subprocess.run(["apt-get", "install", "-y", "make"], check=True, capture_output=True)
    repo = Path(__file__).resolve().parents[2]
    dry = subprocess.run(["make", "-n", "-C", str(repo), "serve", "PORT=8123"],
                         capture_output=True, text=True, check=True).stdout
    (line,) = [ln for ln in dry.splitlines() if "stressmap serve" in ln]
    assert line.endswith("--port 8123")
    plain = subprocess.run(["make", "-n", "-C", str(repo), "serve"], capture_output=True,
                           text=True, check=True, env={k: v for k, v in os.environ.items()
                                                       if k != "PORT"}).stdout
    assert "--port" not in plain
