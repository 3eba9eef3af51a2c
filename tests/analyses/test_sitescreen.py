"""Screening requests end to end (no model): validation, measured magnitudes, traces, sampling."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import screening as sc
from stressmap.errors import InputError
from stressmap.analyses.sitescreen import screen
from stressmap.formats.screening import parse_request_json as parse_request
from stressmap.formats.screening import result_json

SITE = {"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0}


def run(**kw):
    return result_json(screen(parse_request({**SITE, **kw})))


def test_both_measured_magnitudes_set_the_regime():
    doc = run(shmax_mpa=100.0, shmin_mpa=50.0, planes=["000/90"])
    assert doc["regime"] == "strike-slip" and doc["sources"]["regime"] == "measured magnitudes"
    assert doc["shmax_mpa"] == 100.0 and doc["shmin_mpa"] == 50.0
    with pytest.raises(InputError) as err:
        run(regime="normal", shmax_mpa=100.0, shmin_mpa=50.0)
    assert err.value.problems[0]["field"] == "regime"


def test_magnitudes_beyond_the_frictional_limit_are_flagged():
    # SHmax 160, Shmin 40 with Pp 29.4: (160-29.4)/(40-29.4) = 12.3 >> 3.12 (Jaeger & Cook)
    doc = run(shmax_mpa=160.0, shmin_mpa=40.0, planes=["040/90"])
    assert any("exceed the frictional limit" in n for n in doc["notes"])
    # an optimally oriented vertical plane (Jaeger & Cook angle from SHmax) is beyond failure
    beta = 45.0 - 0.5 * np.degrees(np.arctan(0.6))
    doc = run(shmax_mpa=160.0, shmin_mpa=40.0, planes=[f"{40 + beta}/90"])
    assert doc["planes"][0]["pore_pressure_margin_mpa"] < 0
    assert doc["planes"][0]["at_or_beyond_failure"] is True


def test_gradient_density_profile_and_pore_gradient():
    doc = run(regime="reverse", density_profile={"top_km": [0.0], "density_kg_m3": [2100.0],
                                                 "gradient_kg_m3_per_km": [150.0]},
              pore_gradient_mpa_km=11.0)
    # Sv = g (rho0 z + grad z^2 / 2), analytic integral of a linear profile
    assert_allclose(doc["sv_mpa"], 9.81e3 * (2100 * 3 + 150 * 9 / 2) / 1e6, rtol=1e-12)
    assert_allclose(doc["pp_mpa"], 33.0)
    q = sc.frictional_limit_ratio(0.6)
    assert_allclose(doc["shmax_mpa"], 33.0 + q * (doc["sv_mpa"] - 33.0))


def test_request_problems_are_collected():
    with pytest.raises(InputError) as err:
        parse_request({"site": [500, 95], "depth_km": 0, "friction": -1,
                       "density_kg_m3": 2400, "density_profile": {"density_kg_m3": [2400]},
                       "pore_gradient_mpa_km": 10, "pore_pressure_mpa": 30,
                       "planes": "040/60"})
    fields = {p["field"] for p in err.value.problems}
    assert {"site", "depth_km", "friction", "density_profile", "pore_pressure_mpa",
            "planes"} <= fields


def test_sampling_is_reproducible_and_pore_range_moves_margins_one_to_one():
    planes = ["040/60", "130/80"]
    base = dict(regime="normal", planes=planes, shmin_mpa=45.0, shmax_mpa=55.0)
    a = run(**base, uncertainty={"samples": 500, "seed": 4, "pore_pressure_range_mpa": [25, 30],
                                 "azimuth_sigma_deg": 0})
    b = run(**base, uncertainty={"samples": 500, "seed": 4, "pore_pressure_range_mpa": [25, 30],
                                 "azimuth_sigma_deg": 0})
    assert a["planes"] == b["planes"]
    # with fixed measured magnitudes and orientation, margin = fixed - Pp: its central 80 %
    # band spans the 10-90 % band of a uniform 25-30 MPa Pp, i.e. 0.8 * 5 MPa = 4.0 MPa
    for p in a["planes"]:
        width = p["margin_band_high_mpa"] - p["margin_band_low_mpa"]
        assert_allclose(width, 4.0, atol=0.25)


def test_traces_without_dip_direction_dip_right_of_digitising():
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"dip_deg": 50},
         "geometry": {"type": "LineString", "coordinates": [[-15.0, -20.0], [-15.0, -20.1]]}}]}
    doc = run(regime="normal", faults=faults)
    seg = doc["planes"][0]
    assert_allclose(seg["strike_deg"], 180.0, atol=1e-6)   # digitised southward
    assert_allclose(seg["dip_direction_deg"], 270.0, atol=1e-6)
    # never silent: the note names the fault and the direction it was given
    assert any(n.startswith("fault 1: no dip_direction_deg") and "toward 270 deg" in n
               for n in doc["notes"])


def test_wiggly_trace_segments_are_noted_not_rejected():
    # overall trend north, dipping east; one short segment runs east-north-east
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"dip_deg": 60, "dip_direction_deg": 90},
         "geometry": {"type": "LineString",
                      "coordinates": [[-15.0, -20.0], [-15.0, -19.95], [-14.99, -19.947],
                                      [-14.99, -19.9]]}}]}
    doc = run(regime="normal", faults=faults)
    strikes = sorted(p["strike_deg"] for p in doc["planes"])
    assert_allclose(strikes[:2], 0.0, atol=1e-6)
    # the ENE segment (azimuth ~73) dips to the SSE side, nearer the stated east
    odd = [p for p in doc["planes"] if 10 < p["strike_deg"] < 350]
    assert len(odd) == 1 and 60 < odd[0]["strike_deg"] < 90
    assert any("1 trace segment(s)" in n for n in doc["notes"])


def _indicator_fc(lon, lat, az):
    """Invented breakout indicators (test fixtures, not real data)."""
    return {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"type": "breakout", "azimuth_deg": float((a + 90) % 180),
                                           "sigma_deg": 15.0},
         "geometry": {"type": "Point", "coordinates": [float(x), float(y)]}}
        for x, y, a in zip(lon, lat, az)]}


def test_indicator_derived_spread_without_a_model():
    from scipy.stats import circstd

    rng = np.random.default_rng(8)
    az = np.mod(40.0 + rng.normal(0.0, 12.0, 30), 180.0)
    lon = -15.0 + rng.uniform(-1, 1, 30)
    lat = -20.0 + rng.uniform(-1, 1, 30)
    far = _indicator_fc([20.0], [10.0], [130.0])  # far away: outside the radius, left out
    fc = _indicator_fc(lon, lat, az)
    fc["features"] += far["features"]
    doc = run(regime="normal", planes=["040/60"],
              uncertainty={"indicators": fc, "indicator_radius_km": 300, "samples": 200})
    info = doc["uncertainty"]["indicator_spread"]
    # independent: scipy circstd of the doubled angles, halved (Mardia & Jupp axial std)
    expected = 0.5 * np.degrees(circstd(np.radians(2 * az)))
    assert_allclose(info["sigma_deg"], expected, rtol=1e-6)
    assert "30 indicators within 300 km" in info["source"]
    assert doc["uncertainty"]["azimuth_sigma_deg"] == info["sigma_deg"]


def test_sampling_in_chunks_equals_one_pass(monkeypatch):
    import stressmap.analyses.site_sampling as ss

    body = dict(regime="strike-slip", planes=["040/60", "130/80", "010/90"],
                uncertainty={"samples": 50, "seed": 1, "friction_range": [0.5, 0.7]})
    whole = run(**body)
    monkeypatch.setattr(ss, "_CHUNK_PLANE_SAMPLES", 7)   # 2 samples per chunk
    assert run(**body)["planes"] == whole["planes"]


# -- every reported quantity agrees with the reported magnitudes -------------------------------

@pytest.mark.parametrize("kw", [
    {"regime": "strike-slip", "shmin_mpa": 48.0, "pore_pressure_mpa": 31.0},
    {"regime": "normal", "shmax_mpa": 60.0},
    {"regime": "reverse", "shmin_mpa": 80.0},
    {"shmax_mpa": 100.0, "shmin_mpa": 50.0},
    {"regime": "strike-slip", "shape_ratio": 0.3},
])
def test_reported_shape_ratio_follows_the_reported_magnitudes(kw):
    # The shape ratio's definition, phi = (S2 - S3) / (S1 - S3) (Angelier 1979, from memory),
    # applied to the three magnitudes the screening itself reports.
    doc = run(planes=["040/60"], **kw)
    s3, s2, s1 = sorted((doc["shmax_mpa"], doc["shmin_mpa"], doc["sv_mpa"]))
    assert_allclose(doc["shape_ratio"], (s2 - s3) / (s1 - s3), atol=1e-9)


def test_sampled_shape_ratios_follow_the_sampled_magnitudes():
    req = parse_request({**SITE, "regime": "strike-slip", "shmin_mpa": 48.0,
                         "pore_pressure_mpa": 31.0, "planes": ["040/60"],
                         "uncertainty": {"friction_range": [0.5, 0.8], "samples": 200}})
    s = screen(req).samples
    mags = np.sort(np.stack([s["shmax_mpa"], s["shmin_mpa"], s["sv_mpa"]]), axis=0)
    assert_allclose(s["shape_ratio"], (mags[1] - mags[0]) / (mags[2] - mags[0]), atol=1e-9)


def test_density_profile_gradient_is_optional_per_layer():
    # null (JSON) for a layer's gradient means no gradient there, like an empty CSV cell
    doc = run(regime="normal", density_profile={"top_km": [0.0, 1.0],
                                                 "density_kg_m3": [2200.0, 2400.0],
                                                 "gradient_kg_m3_per_km": [None, 100.0]})
    assert_allclose(doc["sv_mpa"], 9.81e3 * (2200 * 1 + 2400 * 2 + 100 * 4 / 2) / 1e6, rtol=1e-12)
    assert doc["density_profile"]["gradient_kg_m3_per_km"] == [0.0, 100.0]


def test_fault_margin_curves_are_the_least_margin_over_each_faults_segments():
    # Per fault, per sample: the least margin over its planes; the curve is its empirical
    # quantile function (checked against numpy on the sampled margins directly).
    from stressmap.analyses.sitescreen import fault_margins

    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "bent", "dip_deg": 60, "dip_direction_deg": 90},
         "geometry": {"type": "LineString",
                      "coordinates": [[-15.0, -20.0], [-15.0, -19.95], [-14.99, -19.90]]}}]}
    req = parse_request({**SITE, "regime": "normal", "planes": ["040/60", "130/80"],
                         "faults": faults, "uncertainty": {"samples": 300, "seed": 1,
                                                           "friction_range": [0.5, 0.8]}})
    res = screen(req)
    fm = fault_margins(res)
    assert sorted(fm["name"]) == ["bent", "plane 1 (040/60)", "plane 2 (130/80)"]
    seg = np.asarray(res.planes["kind"]) == "trace segment"
    k = list(fm["name"]).index("bent")
    assert_allclose(fm["margin_mpa"][:, k], res.samples["margin_mpa"][:, seg].min(axis=1))
    assert_allclose(fm["curve_mpa"][k], np.quantile(fm["margin_mpa"][:, k],
                                                    np.linspace(0, 1, 21)))
    doc = result_json(res)
    bent = next(f for f in doc["faults"] if f["name"] == "bent")
    assert bent["margin_curve_mpa"] == pytest.approx(fm["curve_mpa"][k].tolist())
    assert bent["reactivation_share"] == pytest.approx(float(np.mean(fm["margin_mpa"][:, k] < 0)))
    for old in ("pore_pressure_margin_p05_mpa", "probability_margin_below_threshold"):
        assert old not in doc["planes"][0]


@pytest.mark.parametrize("azimuth", [400.0, -361.0])
def test_an_azimuth_beyond_a_turn_is_refused(azimuth):
    from stressmap.analyses.sitescreen import parse_request

    with pytest.raises(InputError) as err:
        parse_request({"site": [0, 0], "depth_km": 3, "shmax_azimuth_deg": azimuth,
                       "regime": "normal"})
    assert err.value.problems[0]["field"] == "shmax_azimuth_deg"


def test_a_missing_orientation_names_the_field_once():
    from stressmap.analyses.sitescreen import parse_request, screen

    with pytest.raises(InputError) as err:
        screen(parse_request({"site": [0, 0], "depth_km": 3}))
    messages = " ".join(p["message"] for p in err.value.problems)
    assert "give shmax_azimuth_deg or a model" in messages and "(" not in messages


def test_a_plane_without_a_trace_has_no_segment_number():
    from stressmap.analyses.sitescreen import parse_request, screen
    from stressmap.formats.screening import result_json

    doc = result_json(screen(parse_request({"site": [0, 0], "depth_km": 3, "regime": "normal",
                                            "shmax_azimuth_deg": 30, "planes": ["040/60"]})))
    assert doc["planes"][0]["segment"] is None
