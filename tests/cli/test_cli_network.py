"""stressmap network check|plates|build and predict on a network directory, run as a user would."""

from __future__ import annotations

import json

import pytest

from stressmap.cli import main


def line(coords, **p):
    return {"type": "Feature", "properties": p, "geometry": {"type": "LineString", "coordinates": coords}}


@pytest.fixture
def files(tmp_path):
    lines = {"type": "FeatureCollection", "features": [
        line([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], kind="free"),
        line([[0, 10], [5, 5], [10, 0]], kind="subduction", sinks="right", left="North",
             right="South", slab_age_myr=50, slab_depth_km=410, pull_fraction=0.1)]}
    (tmp_path / "net.geojson").write_text(json.dumps(lines))
    (tmp_path / "params.toml").write_text('name = "pair"\n[defaults.mesh]\nedge_km = 300.0\n'
                                          '[plates.North.sheet]\nthickness_km = 80.0\n')
    return tmp_path


def test_check_plates_build_predict(files, capsys):
    net, params = str(files / "net.geojson"), str(files / "params.toml")
    assert main(["network", "check", net, "--params", params]) == 0
    out = capsys.readouterr().out
    assert "2 plates" in out and "North" in out and "open (regional" in out
    assert main(["network", "plates", net, "--params", params, "-o", str(files / "p.geojson"),
                 "--documents", str(files / "docs")]) == 0
    fc = json.loads((files / "p.geojson").read_text())
    assert {f["properties"]["plate"] for f in fc["features"]} == {"North", "South"}
    north = json.loads((files / "docs" / "North.json").read_text())
    assert north["sheet"]["thickness_km"] == 80.0 and north["region"] == "left"
    assert {f["properties"]["kind"] for f in north["boundary"]["features"]} == {"free", "overriding"}
    out_dir = str(files / "built")
    assert main(["network", "build", net, "--params", params, "-o", out_dir, "--plate", "South",
                 "--workers", "1"]) == 0
    assert "built  South" in capsys.readouterr().out
    assert main(["network", "build", net, "--params", params, "-o", out_dir, "--workers", "1"]) == 0
    out = capsys.readouterr().out
    assert "built  North" in out and "reused South" in out
    pts = files / "pts.csv"
    pts.write_text("lon,lat\n2,2\n8,8\n30,30\n")
    assert main(["predict", out_dir, "--points", str(pts), "-o", str(files / "o.csv")]) == 0
    rows = [r for r in (files / "o.csv").read_text().splitlines() if not r.startswith("#")]
    assert rows[0].endswith(",plate")
    assert [r.split(",")[-1] for r in rows[1:]] == ["South", "North", ""]


def test_bad_network_exits_2_with_positioned_problems(files, capsys):
    bad = json.loads((files / "net.geojson").read_text())
    bad["features"][1]["geometry"]["coordinates"][-1] = [10.3, 0.2]
    (files / "bad.geojson").write_text(json.dumps(bad))
    assert main(["network", "check", str(files / "bad.geojson")]) == 2
    err = capsys.readouterr().err
    assert "near-miss: line 1 ends at (lon 10.3000, lat 0.2000)" in err
    assert main(["network", "build", str(files / "bad.geojson"), "-o", str(files / "x")]) == 2
    assert not (files / "x").exists()
