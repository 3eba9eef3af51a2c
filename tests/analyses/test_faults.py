"""Specification of stressmap.analyses.faults: tractions, tendencies, margins, trace geometry."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.errors import InputError


def _fault_frame_reference(stress_ned, strike_deg, dip_deg):
    """Independent traction computation: rotate the tensor into the fault frame with scipy.

    Rotation.from_euler("ZX", [strike, dip]) maps fault axes to NED: x' along strike, y'
    down-dip, z' normal to the plane (pointing into the footwall). Then sigma_n = S'_zz,
    tau = |(S'_xz, S'_yz)|, and the hanging wall's slip direction is (S'_xz, S'_yz) in
    (strike, down-dip) components, giving rake = atan2(-S'_yz, S'_xz) (Aki & Richards).
    """
    from scipy.spatial.transform import Rotation

    r = Rotation.from_euler("ZX", np.stack([strike_deg, dip_deg], axis=-1),
                            degrees=True).as_matrix()
    local = np.einsum("fji,jk,fkl->fil", r, stress_ned, r)
    sn = local[:, 2, 2]
    tau = np.hypot(local[:, 0, 2], local[:, 1, 2])
    rake = np.degrees(np.arctan2(-local[:, 1, 2], local[:, 0, 2]))
    return sn, tau, rake


@pytest.fixture
def stress():
    # strike-slip state, SHmax at azimuth 35, Pp 30 MPa (magnitudes in MPa)
    return sc.principal_tensor_ned(110.0, 45.0, 72.0, 35.0), 30.0


def test_tractions_match_rotation_into_fault_frame(stress):
    s, pp = stress
    rng = np.random.default_rng(3)
    strike = rng.uniform(0, 360, 300)
    dip = rng.uniform(0, 90, 300)
    out = fl.fault_tendencies(s, pp, strike, dip, friction=0.6, cohesion_mpa=2.0)
    sn, tau, rake = _fault_frame_reference(s, strike, dip)
    assert_allclose(out["normal_stress_mpa"], sn, atol=1e-10)
    assert_allclose(out["shear_stress_mpa"], tau, atol=1e-10)
    assert_allclose(np.mod(out["rake_deg"] - rake + 180, 360) - 180, 0.0, atol=1e-8)
    assert_allclose(out["slip_tendency"], tau / (sn - pp), rtol=1e-10)  # Morris et al. 1996
    # Ferrill et al. 1999 with principal values from numpy's eigvalsh of the same tensor
    w = np.linalg.eigvalsh(s)
    assert_allclose(out["dilation_tendency"], (w[2] - sn) / (w[2] - w[0]), atol=1e-10)
    assert_allclose(out["coulomb_failure_stress_mpa"], tau - 0.6 * (sn - pp) - 2.0, atol=1e-10)
    assert_allclose(out["pore_pressure_margin_mpa"], -out["coulomb_failure_stress_mpa"] / 0.6,
                    atol=1e-10)


def test_hand_worked_normal_fault():
    # Worked by hand with the 2-D Mohr circle (Jaeger & Cook): S1 = Sv = 70 vertical,
    # S3 = 42.8 east-west, S2 = 56.4 north-south; plane strike 0, dip 60 (normal 60 deg from
    # S1): sigma_n = (S1+S3)/2 + (S1-S3)/2 cos 120 = 49.6; tau = (S1-S3)/2 sin 120 = 11.778.
    s = sc.principal_tensor_ned(56.4, 42.8, 70.0, 0.0)
    out = fl.fault_tendencies(s, 30.0, 0.0, 60.0, friction=0.6)
    assert_allclose(out["normal_stress_mpa"], 49.6, atol=1e-10)
    assert_allclose(out["shear_stress_mpa"], 13.6 * np.sin(np.radians(120)), atol=1e-10)
    assert_allclose(out["slip_tendency"], 11.7779 / 19.6, atol=1e-4)
    assert_allclose(out["dilation_tendency"], (70.0 - 49.6) / (70.0 - 42.8), atol=1e-12)
    assert_allclose(out["rake_deg"], -90.0, atol=1e-9)  # pure normal dip-slip
    # Same geometry in a reverse state: plane striking perpendicular to SHmax slips reverse
    rev = sc.principal_tensor_ned(150.0, 100.0, 70.0, 90.0)
    assert_allclose(fl.fault_tendencies(rev, 30.0, 0.0, 30.0)["rake_deg"], 90.0, atol=1e-9)


def test_dilation_tendency_extremes_and_vertical_strike_slip():
    s = sc.principal_tensor_ned(100.0, 40.0, 70.0, 0.0)  # S1 north, S3 east
    # plane normal to S3 (strike 0, vertical) -> Td = 1; plane normal to S1 (strike 90) -> 0
    out = fl.fault_tendencies(s, 20.0, [0.0, 90.0, 45.0], 90.0)
    assert_allclose(out["dilation_tendency"][:2], [1.0, 0.0], atol=1e-12)
    # vertical plane at 45 deg: sigma_n = 70, tau = 30 (Mohr circle centre 70, radius 30)
    assert_allclose(out["normal_stress_mpa"][2], 70.0, atol=1e-12)
    assert_allclose(out["shear_stress_mpa"][2], 30.0, atol=1e-12)
    # strike 45 dipping SE: hanging wall (SE side) moves ... left-lateral: rake 0
    assert_allclose(out["rake_deg"][2], 0.0, atol=1e-9)


@pytest.mark.parametrize("regime, phi", [("normal", 0.5), ("strike-slip", 0.5),
                                         ("reverse", 0.3)])
def test_optimal_fault_at_frictional_limit_has_zero_margin(regime, phi):
    # A state at the Jaeger & Cook limit: the best-oriented plane is exactly at failure.
    sv, pp, mu = 72.0, 29.4, 0.6
    shmax, shmin = sc.frictional_equilibrium(sv, pp, mu, regime, phi)
    s = sc.principal_tensor_ned(shmax, shmin, sv, 20.0)
    # dense search over all orientations (vectorised; 720 x 181 planes)
    strike, dip = np.meshgrid(np.arange(0, 360, 0.5), np.linspace(0, 90, 181))
    margin = fl.fault_tendencies(s, pp, strike.ravel(), dip.ravel(), mu)["pore_pressure_margin_mpa"]
    assert margin.min() >= -1e-9          # nothing beyond failure
    assert margin.min() < 0.02            # and the best plane is at it (grid resolution)
    # the Coulomb-optimal planes (angle 45 - atan(mu)/2 to S1) are exactly at zero
    opt_strike, opt_dip = fl.optimal_planes(20.0, sc.regime_code_of(regime), mu)
    at_opt = fl.fault_tendencies(s, pp, opt_strike, opt_dip, mu)
    assert_allclose(at_opt["pore_pressure_margin_mpa"], 0.0, atol=1e-9)
    assert_allclose(at_opt["slip_tendency"], mu, atol=1e-12)  # Ts = mu at failure (Morris)


@pytest.mark.parametrize("regime", ["normal", "strike-slip", "reverse"])
def test_rotating_away_from_optimal_raises_margin(regime):
    sv, pp, mu = 72.0, 29.4, 0.6
    shmax, shmin = sc.frictional_equilibrium(sv, pp, mu, regime, 0.5)
    s = sc.principal_tensor_ned(shmax, shmin, sv, 20.0)
    opt_strike, opt_dip = fl.optimal_planes(20.0, sc.regime_code_of(regime), mu)
    turns = np.array([0.0, 5.0, 10.0, 20.0, 30.0])
    if regime == "strike-slip":   # rotate the vertical plane's strike further from SHmax
        strike, dip = opt_strike[0] + turns, np.full_like(turns, 90.0)
    else:                         # steepen (normal) or shallow (reverse) the dip
        step = 1.0 if regime == "normal" else -1.0
        strike, dip = np.full_like(turns, opt_strike[0]), opt_dip[0] + step * turns
    margin = fl.fault_tendencies(s, pp, strike, dip, mu)["pore_pressure_margin_mpa"]
    assert_allclose(margin[0], 0.0, atol=1e-9)
    assert np.all(np.diff(margin) > 0)


def test_vectorised_over_samples_and_faults(stress):
    s, pp = stress
    n, f = 64, 7
    stack = np.broadcast_to(s, (n, 3, 3))[:, None]     # (N, 1, 3, 3)
    pp_s = np.linspace(25.0, 35.0, n)[:, None]
    out = fl.fault_tendencies(stack, pp_s, np.linspace(0, 300, f), np.full(f, 60.0), 0.6)
    assert out["pore_pressure_margin_mpa"].shape == (n, f)
    # raising pore pressure by dP lowers every margin by exactly dP (effective stress law)
    d = np.diff(out["pore_pressure_margin_mpa"], axis=0)
    assert_allclose(d, -(10.0 / (n - 1)), atol=1e-10)


def test_rank_order_puts_least_margin_first():
    assert fl.rank_order([3.0, -2.0, np.nan, 0.5]).tolist() == [1, 3, 0, 2]


# --- traces -----------------------------------------------------------------------------------

def _spherical_bearing(lon1, lat1, lon2, lat2):
    """Initial great-circle bearing, the textbook spherical-trigonometry formula."""
    p1, p2, dl = np.radians(lat1), np.radians(lat2), np.radians(lon2 - lon1)
    y = np.sin(dl) * np.cos(p2)
    x = np.cos(p1) * np.sin(p2) - np.sin(p1) * np.cos(p2) * np.cos(dl)
    return np.degrees(np.arctan2(y, x)) % 360


def test_segment_azimuth_matches_spherical_trigonometry():
    rng = np.random.default_rng(5)
    lon1, lat1 = rng.uniform(-180, 180, 50), rng.uniform(-60, 60, 50)
    az = rng.uniform(0, 360, 50)
    lon2 = lon1 + 0.5 * np.sin(np.radians(az)) / np.cos(np.radians(lat1))
    lat2 = lat1 + 0.5 * np.cos(np.radians(az))
    got = fl.segment_azimuth_deg(lon1, lat1, lon2, lat2)
    # the segment's strike is the mean of its initial and final great-circle bearings
    initial = np.radians(_spherical_bearing(lon1, lat1, lon2, lat2))
    final = np.radians(_spherical_bearing(lon2, lat2, lon1, lat1) + 180.0)
    ref = np.degrees(np.arctan2(np.sin(initial) + np.sin(final), np.cos(initial) + np.cos(final)))
    assert_allclose(np.mod(got - ref + 180, 360) - 180, 0.0, atol=1e-8)


def test_right_hand_rule_strike_from_trace_and_dip_direction():
    # Trace digitised northward with a slight westward trend (azimuth ~355, crossing 0/360 once
    # flipped): dipping east -> strike ~355; dipping west -> strike ~175 (right-hand rule).
    lon1, lat1, lon2, lat2 = 10.0, 45.0, 9.9, 46.0
    az = fl.segment_azimuth_deg(lon1, lat1, lon2, lat2)
    assert 350.0 < az < 360.0
    s_east, m_east = fl.strike_from_azimuth(az, 85.0)
    s_west, m_west = fl.strike_from_azimuth(az, 265.0)
    assert_allclose(s_east, az)
    assert_allclose(s_west, az - 180.0)
    # digitising the same trace in the opposite direction changes nothing
    az_rev = fl.segment_azimuth_deg(lon2, lat2, lon1, lat1)
    assert_allclose(fl.strike_from_azimuth(az_rev, 85.0)[0], s_east, atol=1e-9)
    # dip direction consistency: RHR dip direction (strike + 90) is within the misfit of the
    # stated dip direction
    for s, m, dd in ((s_east, m_east, 85.0), (s_west, m_west, 265.0)):
        diff = abs((s + 90.0 - dd + 180.0) % 360.0 - 180.0)
        assert_allclose(diff, m, atol=1e-9)
        assert m < 10.0


def test_strike_wraps_across_0_360():
    # trace trending 5 deg east of north, dipping WNW (290): strike = 185; trending 355
    # dipping ENE (80): strike 355; a strike of 359.x + 180 wraps to 179.x.
    s, _ = fl.strike_from_azimuth([5.0, 355.0, 359.5, 0.5], [290.0, 80.0, 269.0, 271.0])
    assert_allclose(s, [185.0, 355.0, 179.5, 180.5])
    assert np.all((s >= 0) & (s < 360))


def test_trace_crossing_the_antimeridian_runs_east():
    az = fl.segment_azimuth_deg(179.99, 0.0, -179.99, 0.0)
    assert_allclose(az, 90.0, atol=1e-6)


def test_validate_planes_reports_rows():
    with pytest.raises(InputError) as err:
        fl.validate_planes([10.0, np.nan, 30.0], [30.0, 40.0, -5.0])
    rows = {(p["field"], p["row"]) for p in err.value.problems}
    assert rows == {("planes.strike_deg", 2), ("planes.dip_deg", 3)}


def test_vertical_principal_shortcut_equals_full_resolution():
    rng = np.random.default_rng(9)
    n, f = 40, 25
    s = sc.principal_tensor_ned(rng.uniform(60, 120, n), rng.uniform(30, 60, n),
                                rng.uniform(50, 90, n), rng.uniform(0, 180, n))[:, None]
    strike, dip = rng.uniform(0, 360, f), rng.uniform(0, 90, f)
    normal, _, _ = fl.plane_vectors_ned(strike, dip)
    sn, tau = fl.tractions_vertical_principal(s[..., 0, 0], s[..., 1, 1], s[..., 0, 1],
                                              s[..., 2, 2], normal)
    full_sn, full_tau, _ = fl.resolve_traction(s, normal)
    assert_allclose(sn, full_sn, atol=1e-10)
    assert_allclose(tau, full_tau, atol=1e-6)
