"""Grid files named by a document (stressmap.io.grids), read at the edge for the CLI."""

from __future__ import annotations

import json

import numpy as np
import pytest

from stressmap.data.demo_elevation import write_demo_gpe
from stressmap.errors import InputError
from stressmap.io.grids import document_bbox, read_document_grids, read_grid


def _doc(coords):
    return {"boundary": {"features": [{"geometry": {"coordinates": coords}}]}}


def test_document_bbox_and_the_antimeridian():
    assert document_bbox(_doc([[-10, 5], [20, -5], [0, 30]])) == (-10.0, -5.0, 20.0, 30.0)
    w, s, e, n = document_bbox(_doc([[170, 0], [-170, 10], [175, 20]]))
    assert (w, e) == (170.0, -170.0) and (s, n) == (0.0, 20.0)
    assert document_bbox({"boundary": None}) is None


def test_relative_paths_are_tried_from_the_document_folder(tmp_path, monkeypatch):
    grid_path, doc_path = write_demo_gpe(tmp_path / "demo")
    monkeypatch.chdir(tmp_path)
    doc = json.loads(doc_path.read_text())
    grids = read_document_grids(doc, base_dir=doc_path.parent)
    raster = grids["demo_elevation.nc"]
    assert raster.units == "m" and np.nanmax(raster.values) > 2900.0
    # subset to the plate (demo plate: about 37 W .. 10 E, 37 S .. 3 S) with a margin
    assert raster.lon[0] >= -40.0 and raster.lat[-1] <= 0.0
    with pytest.raises(InputError) as err:
        read_document_grids(doc)  # no base folder, not in the working directory
    assert err.value.problems[0]["field"] == "gpe.elevation_grid"


def test_missing_variable_names_its_field(tmp_path):
    grid_path, doc_path = write_demo_gpe(tmp_path)
    with pytest.raises(InputError) as err:
        read_grid(grid_path, "elevation", variable="height", field="gpe.elevation_grid",
                  variable_field="gpe.elevation_variable")
    assert err.value.problems[0]["field"] == "gpe.elevation_variable"


def test_cli_build_reads_the_grids_the_document_names(tmp_path, capsys):
    from stressmap.cli import main
    from stressmap.io.modeldir import read_model

    _, doc_path = write_demo_gpe(tmp_path / "in")
    doc = json.loads(doc_path.read_text())
    doc["mesh"] = {"edge_km": 150.0}
    doc_path.write_text(json.dumps(doc))
    assert main(["build", str(doc_path), "-o", str(tmp_path / "model")]) == 0
    built = read_model(tmp_path / "model")
    assert "gpe" in built.groups
    assert set(built.summary["timings"]) >= {"validate_s", "mesh_s", "assemble_s", "factorise_s",
                                             "loads_s", "solve_s", "recover_s", "collect_s"}
