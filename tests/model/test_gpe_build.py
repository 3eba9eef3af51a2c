"""The GPE load group in a built model (stressmap.model.build with a `gpe` table)."""

from __future__ import annotations

import copy
import json
from importlib import resources

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap import model
from stressmap.data.demo_elevation import PLATEAU, demo_elevation, demo_gpe_document
from stressmap.errors import ModelValidationError


@pytest.fixture(scope="module")
def elevation():
    return demo_elevation(0.25)


@pytest.fixture(scope="module")
def built(elevation):
    return model.build_model(demo_gpe_document("elev"), grids={"elev": elevation})


def _demo():
    return json.loads(resources.files("stressmap.data").joinpath("demo_plate.json").read_text())


def test_gpe_is_one_more_load_group_with_its_own_drag(built):
    assert built.groups[-1] == "gpe" and "ridge" in built.groups
    g = next(r for r in built.summary["groups"] if r["name"] == "gpe")
    assert g["torque_after_n_m"] < 1e-9 * g["torque_before_n_m"]
    assert built.summary["gpe"]["isostasy"] == "airy"
    u = built.fields["gpe_n_per_m"].values
    assert np.isfinite(u).any() and np.isnan(u).any()  # the oceanic basin carries no GPE here


def test_plateau_is_in_extension_and_its_surroundings_in_compression(built):
    """Normal faulting on the plateau, compression in the lowlands around it (issue 13; the
    classic result for high plateaus, e.g. Molnar & Lyon-Caen 1988, from memory)."""
    lon0, lat0 = PLATEAU[:2]
    only = {g: (1.0 if g == "gpe" else 0.0) for g in built.groups}
    ds = model.predict_points(built, [lon0, lon0 + 6.5], [lat0, lat0], weights=only)
    assert ds["regime"].values[0] == "normal"
    assert ds["s_hmax_mpa"].values[1] > 0  # compressive just outside the plateau edge
    # east of the plateau the compression is radial: SHmax about east-west
    assert abs(((ds["shmax_azimuth_deg"].values[1] - 90.0) + 90.0) % 180.0 - 90.0) < 20.0


def test_weight_zero_is_the_model_without_gpe(built):
    plain = model.build_model(_demo())
    lon, lat = [-26.0, -15.0, -5.0], [-13.0, -20.0, -25.0]
    a = model.predict_points(built, lon, lat, weights={"gpe": 0.0})
    b = model.predict_points(plain, lon, lat)
    assert_allclose(a["s_hmax_mpa"].values, b["s_hmax_mpa"].values, rtol=1e-6, atol=1e-6)


def test_ridge_push_from_gpe_matches_distributed_ridge_push():
    """ridge_push.mode 'gpe' on an all-oceanic plate: the GPE of the cooling columns is the
    distributed ridge push (same ages), so the two unit fields agree within 1 %; the ridge
    segments carry no edge force of their own (ridge push is never counted twice)."""
    doc = _demo()
    doc.pop("provinces")
    dist, gp = copy.deepcopy(doc), copy.deepcopy(doc)
    dist["ridge_push"] = {"mode": "distributed", "age_source": "ridge_distance"}
    gp["ridge_push"] = {"mode": "gpe", "age_source": "ridge_distance"}
    a = model.build_model(dist)
    b = model.build_model(gp)
    assert "ridge" in a.groups and "ridge" not in b.groups and "gpe" in b.groups
    ua = a.fields["unit_force_n_per_m"].sel(group="ridge").values
    ub = b.fields["unit_force_n_per_m"].sel(group="gpe").values
    assert np.linalg.norm(ua - ub) < 0.01 * np.linalg.norm(ua)


def test_a_ridge_force_with_gpe_ridge_push_is_refused():
    doc = _demo()
    doc["ridge_push"] = {"mode": "gpe", "age_source": "provinces"}
    doc["boundary"]["features"][2]["properties"]["force_n_per_m"] = 3e12
    with pytest.raises(ModelValidationError) as err:
        model.build_model(doc, grids={"elevation": demo_elevation(0.5)})
    assert any("twice" in p["message"] and p["field"].endswith("force_n_per_m")
               for p in err.value.problems)


def test_missing_or_short_grids_name_the_field(elevation):
    doc = demo_gpe_document("elev")
    with pytest.raises(ModelValidationError) as err:
        model.build_model(doc)
    assert err.value.problems[0]["field"] == "gpe.elevation_grid"
    assert "not given to the build" in err.value.problems[0]["message"]
    small = (elevation.lon[:40], elevation.lat, elevation.values[:, :40])  # west part only
    with pytest.raises(ModelValidationError) as err:
        model.build_model(doc, grids={"elev": small})
    assert err.value.problems[0]["field"] == "gpe.elevation_grid"
    assert "outside the elevation grid" in err.value.problems[0]["message"]
    holes = elevation.values.copy()
    holes[60:80, 40:60] = np.nan  # a hole inside the shield (about 25 W, 23 S)
    with pytest.raises(ModelValidationError, match="does not cover"):
        model.build_model(doc, grids={"elev": (elevation.lon, elevation.lat, holes)})


def test_gpe_table_is_validated():
    doc = demo_gpe_document("elev")
    doc["gpe"].update({"isostasy": "flexural", "crust_density_kg_m3": -1, "extra": 1})
    with pytest.raises(ModelValidationError) as err:
        model.build_model(doc)
    fields = {p["field"] for p in err.value.problems}
    assert {"gpe.isostasy", "gpe.crust_density_kg_m3", "gpe.extra"} <= fields


def test_crust_isostasy_with_the_airy_crust_reproduces_the_airy_build(elevation):
    """isostasy 'crust' given the crustal thickness Airy implies (from the same elevation) is the
    Airy column (stressmap.physics.gpe), so the two builds give the same GPE unit field. Land only
    (elevation >= 0), where the Airy crust is linear in elevation, so resampling (linear) commutes
    with it."""
    from stressmap.geo.raster import Raster
    from stressmap.physics.gpe import airy_moho_m

    e = np.maximum(elevation.values, 0.0)
    elevation = Raster(elevation.lon, elevation.lat, e, "elevation", "m")
    top = np.where(e > 0, -e, np.maximum(-e, 0.0))
    crust_km = (airy_moho_m(e) - top) / 1e3
    crust = Raster(elevation.lon, elevation.lat, crust_km, "crust_thickness", "km")
    doc = demo_gpe_document("elev")
    doc["mesh"] = {"edge_km": 200.0}
    airy = model.build_model(doc, grids={"elev": elevation})
    doc["gpe"].update({"isostasy": "crust", "crust_grid": "moho"})
    both = model.build_model(doc, grids={"elev": elevation, "moho": crust})
    a = airy.fields["unit_stress_mpa"].sel(group="gpe").values
    b = both.fields["unit_stress_mpa"].sel(group="gpe").values
    assert_allclose(b, a, rtol=0, atol=1e-6 * np.abs(a).max())
