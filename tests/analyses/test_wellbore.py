"""Specification of stressmap.analyses.wellbore: wall stresses of inclined wells, failure,
mud-weight windows and SHmax from breakout widths."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq
from scipy.spatial.transform import Rotation

from stressmap.analyses.screening import principal_tensor_ned
from stressmap.analyses.wellbore import (
    borehole_rotation,
    borehole_stress,
    breakdown_pressure_mpa,
    breakout_width_deg,
    collapse_pressure_mpa,
    failure_azimuths_deg,
    mud_window,
    rock_strength,
    shear_failure_index,
    shmax_from_breakout_mpa,
    wall_stresses,
)
from stressmap.errors import InputError

SH, SHMIN, SV, PP = 90.0, 60.0, 70.0, 30.0


def test_vertical_well_wall_stress_is_kirsch():
    # Kirsch (1898) at the wall of a vertical hole, theta from SHmax: s_tt = SH + Sh
    # - 2 (SH - Sh) cos 2t - Pw, s_zz = Sv - 2 nu (SH - Sh) cos 2t (analytic; Jaeger, Cook &
    # Zimmerman, "Fundamentals of Rock Mechanics", 4th ed., sec. 8.11 -- from memory)
    s = principal_tensor_ned(SH, SHMIN, SV, 0.0)
    theta = np.radians(np.linspace(0, 180, 37))
    s_rr, s_tt, s_zz, t_tz = wall_stresses(borehole_stress(s, 0.0, 0.0), 35.0, 0.25, theta)
    assert_allclose(s_tt, SH + SHMIN - 2 * (SH - SHMIN) * np.cos(2 * theta) - 35.0, atol=1e-9)
    assert_allclose(s_zz, SV - 2 * 0.25 * (SH - SHMIN) * np.cos(2 * theta), atol=1e-9)
    assert_allclose(t_tz, 0.0, atol=1e-9)
    assert_allclose(s_rr, 35.0)
    # the hoop stress peaks at 3 SH - Sh - Pw facing Shmin, falls to 3 Sh - SH - Pw facing SHmax
    assert_allclose(s_tt.max(), 3 * SH - SHMIN - 35.0, atol=1e-9)
    assert_allclose(s_tt.min(), 3 * SHMIN - SH - 35.0, atol=1e-9)


@pytest.mark.parametrize("azimuth, inclination", [(0, 0), (30, 20), (135, 60), (290, 90)])
def test_borehole_frame_against_an_independent_rotation(azimuth, inclination):
    # scipy's Rotation (an independent library): turn NED about down by the azimuth, then about
    # the new y axis by the inclination (intrinsic z-y' rotation); its columns are the borehole
    # axes x (high side), y, z (downhole) in NED
    r = Rotation.from_euler("ZY", [azimuth, inclination], degrees=True).as_matrix()
    s = principal_tensor_ned(SH, SHMIN, SV, 25.0)
    ours = borehole_stress(s, azimuth, inclination)
    assert_allclose(ours, r.T @ s @ r, atol=1e-9)
    assert_allclose(borehole_rotation(azimuth, inclination), r.T, atol=1e-12)
    # invariants of the tensor are kept
    assert_allclose(np.trace(ours), SH + SHMIN + SV)
    assert_allclose(np.linalg.eigvalsh(ours), sorted([SH, SHMIN, SV]), atol=1e-9)


def test_inclined_wall_stresses_against_direct_tensor_algebra():
    # the wall solution in the borehole frame built from a tensor rotated by scipy, then the
    # in-plane principal stresses against numpy's eigvalsh of the 2 x 2 wall tensor
    s = principal_tensor_ned(SH, SHMIN, SV, 10.0)
    r = Rotation.from_euler("ZY", [70.0, 45.0], degrees=True).as_matrix()
    sb = r.T @ s @ r
    theta = np.radians(np.arange(0, 180, 7.5))
    s_rr, s_tt, s_zz, t_tz = wall_stresses(sb, 40.0, 0.2, theta)
    sxx, syy, szz, sxy, sxz, syz = sb[0, 0], sb[1, 1], sb[2, 2], sb[0, 1], sb[0, 2], sb[1, 2]
    # Fjaer et al., "Petroleum Related Rock Mechanics", 2nd ed., eq. 4.87 (from memory)
    expect_tt = sxx + syy - 2 * (sxx - syy) * np.cos(2 * theta) - 4 * sxy * np.sin(2 * theta) - 40
    expect_tz = 2 * (syz * np.cos(theta) - sxz * np.sin(theta))
    assert_allclose(s_tt, expect_tt, atol=1e-9)
    assert_allclose(t_tz, expect_tz, atol=1e-9)
    wall = np.stack([np.stack([s_tt, t_tz], -1), np.stack([t_tz, s_zz], -1)], -2)
    lo, hi = np.linalg.eigvalsh(wall).T
    from stressmap.analyses.wellbore import wall_principal
    t_max, t_min = wall_principal(s_tt, s_zz, t_tz)
    assert_allclose(t_max, hi, atol=1e-9)
    assert_allclose(t_min, lo, atol=1e-9)


def test_breakdown_pressure_of_a_vertical_well_is_the_closed_form():
    # Hubbert & Willis (1957), Haimson & Fairhurst (1967): impermeable wall, vertical well,
    # Pb = 3 Shmin - SHmax - Pp + T0 (analytic)
    s = principal_tensor_ned(SH, SHMIN, SV, 40.0)
    for t0 in (0.0, 5.0):
        rock = rock_strength(50.0, tensile_mpa=t0)
        pb = breakdown_pressure_mpa(borehole_stress(s, 0.0, 0.0), PP, rock)
        assert_allclose(pb, 3 * SHMIN - SH - PP + t0, atol=1e-9)


def test_collapse_pressure_of_a_vertical_well_is_the_closed_form():
    # No breakout: the hoop stress facing Shmin, 3 SH - Sh - Pw, with Pw the least stress,
    # meets Mohr-Coulomb s1' = C0 + q s3' at Pw = (3 SH - Sh - C0 + (q - 1) Pp) / (1 + q)
    # (analytic, from the Kirsch wall stresses and the Jaeger & Cook criterion)
    rock = rock_strength(60.0, internal_friction=0.6)
    q = rock.q
    s = principal_tensor_ned(SH, SHMIN, SV, 0.0)
    pw = collapse_pressure_mpa(borehole_stress(s, 0.0, 0.0), PP, rock)
    assert_allclose(pw, (3 * SH - SHMIN - 60.0 + (q - 1) * PP) / (1 + q), rtol=1e-9)


def test_collapse_pressure_against_an_independent_root_finder():
    # an inclined well: scipy's brentq on the largest shear-failure index over a fine ring of
    # angles (the index is computed from the wall stresses directly, no closed form)
    rock = rock_strength(45.0, internal_friction=0.7, poisson=0.3)
    s = principal_tensor_ned(SH, SHMIN, SV, 20.0)
    sb = borehole_stress(s, 75.0, 50.0)
    theta = np.radians(np.linspace(0, 180, 3601))

    def worst(pw):
        s_rr, s_tt, s_zz, t_tz = wall_stresses(sb, pw, rock.poisson, theta)
        idx = shear_failure_index(s_rr, s_tt, s_zz, t_tz, PP, rock)
        return idx.max()

    expect = brentq(worst, 0.0, SV, xtol=1e-10)
    assert_allclose(collapse_pressure_mpa(sb, PP, rock, n_theta=3600), expect, atol=2e-3)


def test_breakout_width_grows_as_mud_pressure_falls_and_faces_shmin():
    rock = rock_strength(50.0)
    s = principal_tensor_ned(SH, SHMIN, SV, 30.0)
    sb = borehole_stress(s, 0.0, 0.0)
    widths = breakout_width_deg(sb, np.array([20.0, 30.0, 40.0, 60.0]), PP, rock)
    assert np.all(np.diff(widths) <= 0) and widths[0] > 0
    bo, tf = failure_azimuths_deg(sb, PP, rock)
    # breakouts centre on the Shmin azimuth (120), tensile fractures on SHmax (30): common
    # practice, the basis of stress orientation from image logs
    assert abs(((bo - 120.0 + 90) % 180) - 90) < 0.5
    assert abs(((tf - 30.0 + 90) % 180) - 90) < 0.5


def test_shmax_from_breakout_inverts_the_forward_width():
    # the forward width (Mohr-Coulomb with mu_i = 0 and Pw = Pp is exactly "effective hoop
    # stress = UCS") inverted by the published closed form returns SHmax
    # (Zoback et al. 1985; Barton, Zoback & Burns 1988 -- from memory)
    rock = rock_strength(80.0, internal_friction=0.0, poisson=0.0)
    for sh in (95.0, 110.0, 125.0):
        s = principal_tensor_ned(sh, SHMIN, 60.0, 0.0)
        w = breakout_width_deg(borehole_stress(s, 0.0, 0.0), PP, PP, rock, n_theta=36000)
        assert_allclose(shmax_from_breakout_mpa(w, SHMIN, PP, PP, 80.0), sh, atol=0.05)


def test_mud_window_bounds_and_order():
    s = principal_tensor_ned(SH, SHMIN, SV, 0.0)
    w = mud_window(s, PP, SHMIN, [0.0, 90.0], [0.0, 60.0], rock_strength(60.0))
    assert np.all(w["lower_mpa"] >= PP) and np.all(w["upper_mpa"] <= SHMIN)
    assert_allclose(w["width_mpa"], w["upper_mpa"] - w["lower_mpa"])


@pytest.mark.parametrize("kwargs, field", [
    ({"ucs_mpa": -1.0}, "ucs_mpa"), ({"ucs_mpa": 0.0}, "ucs_mpa"),
    ({"ucs_mpa": 50.0, "poisson": 0.5}, "poisson"),
    ({"ucs_mpa": 50.0, "tensile_mpa": -2.0}, "tensile_mpa"),
    ({"ucs_mpa": "strong"}, "ucs_mpa")])
def test_bad_rock_strength_names_its_field(kwargs, field):
    with pytest.raises(InputError) as err:
        rock_strength(**kwargs)
    assert err.value.problems[0]["field"] == field


@pytest.mark.parametrize("inclination", [-1.0, 91.0, np.nan])
def test_inclination_outside_0_90_is_refused(inclination):
    with pytest.raises(InputError) as err:
        borehole_rotation(0.0, inclination)
    assert err.value.problems[0]["field"] == "inclination_deg"


def test_breakout_width_outside_0_180_is_refused():
    with pytest.raises(InputError):
        shmax_from_breakout_mpa(180.0, SHMIN, PP, PP, 50.0)
