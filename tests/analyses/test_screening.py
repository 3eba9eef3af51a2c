"""Specification of stressmap.analyses.screening: overburden, pore pressure, frictional limits, estimates."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import screening as sc
from stressmap.errors import InputError


# --- Jaeger & Cook frictional limit -----------------------------------------------------------

@pytest.mark.parametrize(
    "mu, expected",
    [
        # Zoback, "Reservoir Geomechanics" ch. 4 / Jaeger, Cook & Zimmerman (from memory):
        # mu = 0.6 gives 3.1 ("about 3.1"); mu = 1.0 gives 3 + 2 sqrt 2 = 5.83; mu = 0 gives 1.
        (0.6, 3.12),
        (1.0, 5.83),
        (0.0, 1.00),
        (0.85, 4.68),  # Byerlee's low-stress friction, same formula worked by hand
    ],
)
def test_frictional_limit_ratio_handbook_values(mu, expected):
    assert_allclose(sc.frictional_limit_ratio(mu), expected, atol=0.006)


def test_frictional_limit_ratio_equals_mohr_coulomb_form():
    # Mohr-Coulomb textbook identity (analytic): with phi = atan(mu),
    # ((mu^2+1)^(1/2) + mu)^2 = (1 + sin phi) / (1 - sin phi).
    mu = np.linspace(0.0, 1.2, 25)
    phi = np.arctan(mu)
    assert_allclose(sc.frictional_limit_ratio(mu), (1 + np.sin(phi)) / (1 - np.sin(phi)),
                    rtol=1e-12)


def test_least_stress_in_normal_regime_is_about_0_6_of_sv_at_3_km():
    # Rule of thumb of the trade (common practice): in normal-faulting areas at the frictional
    # limit (mu = 0.6), with hydrostatic pore pressure, the least stress is ~0.6 Sv.
    depth = 3.0
    for rho in (2350.0, 2450.0, 2550.0):  # overburden gradients 23-25 MPa/km (common practice)
        sv = sc.vertical_stress_mpa(depth, sc.density_profile(0.0, rho))
        assert 69.0 <= sv <= 75.5
        pp = sc.pore_pressure_mpa(depth)
        assert_allclose(pp, 29.43, atol=0.01)  # ~10 MPa/km hydrostatic (common practice)
        bounds = sc.regime_bounds(sv, pp, 0.6, "normal")
        assert_allclose(bounds["shmin_lower_mpa"] / sv, 0.6, atol=0.03)
        _, shmin = sc.frictional_equilibrium(sv, pp, 0.6, "normal", 0.5)
        assert_allclose(shmin, bounds["shmin_lower_mpa"], rtol=1e-12)


# --- overburden and pore pressure -------------------------------------------------------------

def test_vertical_stress_matches_scipy_quadrature_for_layered_gradient_profile():
    # Independent check: scipy.integrate.quad of the same piecewise density, times g.
    from scipy.integrate import quad

    top = [0.0, 0.8, 2.0]
    rho = [2100.0, 2350.0, 2600.0]
    grad = [120.0, 60.0, 10.0]
    prof = sc.density_profile(top, rho, grad)

    def density(z_km):
        i = np.searchsorted(top, z_km, side="right") - 1
        return rho[i] + grad[i] * (z_km - top[i])

    depths = np.array([0.3, 0.8, 1.7, 2.0, 4.5])
    expected = [quad(density, 0.0, z, points=[0.8, 2.0], limit=200)[0] * 1e3 * 9.81 / 1e6
                for z in depths]
    assert_allclose(sc.vertical_stress_mpa(depths, prof), expected, rtol=1e-10)


def test_constant_density_gives_linear_overburden_and_mean_density():
    z = np.array([[0.5, 1.0], [2.0, 4.0]])
    sv = sc.vertical_stress_mpa(z, sc.density_profile(0.0, 2500.0))
    assert sv.shape == (2, 2)
    assert_allclose(sv, 2500.0 * 9.81 * z * 1e3 / 1e6, rtol=1e-12)  # rho g z (analytic)
    assert_allclose(sc.mean_density_kg_m3(z, sc.density_profile(0.0, 2500.0)), 2500.0)


def test_pore_pressure_options():
    assert_allclose(sc.pore_pressure_mpa(2.0), 2.0 * 9.81, rtol=1e-12)  # rho_w g z
    assert_allclose(sc.pore_pressure_mpa([1.0, 2.0], gradient_mpa_per_km=11.5), [11.5, 23.0])
    assert_allclose(sc.pore_pressure_mpa([1.0, 2.0], value_mpa=17.0), [17.0, 17.0])


@pytest.mark.parametrize(
    "top, rho, grad, field, row",
    [
        ([0.5], [2400.0], [0.0], "density.top_km", 1),          # does not start at surface
        ([0.0, 2.0, 1.0], [2400.0] * 3, [0.0] * 3, "density.top_km", 3),  # not increasing
        ([0.0, 1.0], [2400.0, np.nan], [0.0, 0.0], "density.density_kg_m3", 2),
        ([0.0], [2400.0], [-100.0], "density.gradient_kg_m3_per_km", 1),  # goes negative
    ],
)
def test_bad_density_profile_names_field_and_row(top, rho, grad, field, row):
    with pytest.raises(InputError) as err:
        sc.density_profile(top, rho, grad)
    assert any(p.get("field") == field and p.get("row") == row for p in err.value.problems)


# --- polygon, bounds, estimates ---------------------------------------------------------------

@pytest.fixture
def site():
    return {"sv": 72.0, "pp": 29.4, "mu": 0.6}


def test_stress_polygon_matches_brute_force_frictional_criterion(site):
    # Independent check: shapely's point-in-polygon against the direct statement of the
    # Jaeger & Cook limit for the principal stresses (SHmax, Shmin, Sv) of random states.
    import shapely

    sv, pp, mu = site["sv"], site["pp"], site["mu"]
    poly = shapely.Polygon(sc.stress_polygon(sv, pp, mu))
    assert poly.is_valid and poly.exterior.is_ccw
    rng = np.random.default_rng(7)
    shmin, shmax = rng.uniform(20.0, 250.0, (2, 4000))
    s = np.stack([shmax, shmin, np.full_like(shmax, sv)])
    s1, s3 = s.max(0), s.min(0)
    admissible = (shmax >= shmin) & (s3 > pp) & ((s1 - pp) <= sc.frictional_limit_ratio(mu) *
                                                (s3 - pp))
    inside = shapely.contains_xy(poly, shmin, shmax)
    margin = np.abs(shapely.distance(poly.exterior, shapely.points(shmin, shmax)))
    clear = margin > 1e-6
    assert np.array_equal(inside[clear], admissible[clear])
    assert admissible.sum() > 200  # the test exercises both outcomes


@pytest.mark.parametrize("regime", ["normal", "strike-slip", "reverse"])
@pytest.mark.parametrize("phi", [0.0, 0.3, 0.5, 0.9, 1.0])
def test_central_estimate_is_at_the_limit_with_the_shape_ratio(site, regime, phi):
    sv, pp, mu = site["sv"], site["pp"], site["mu"]
    shmax, shmin = sc.frictional_equilibrium(sv, pp, mu, regime, phi)
    s1, s2, s3 = np.sort([shmax, shmin, sv])[::-1]
    # equilibrium: (S1 - Pp) = q (S3 - Pp), Jaeger & Cook
    assert_allclose((s1 - pp) / (s3 - pp), sc.frictional_limit_ratio(mu), rtol=1e-10)
    # shape ratio definition (S2 - S3)/(S1 - S3)
    assert_allclose((s2 - s3) / (s1 - s3), phi, atol=1e-10)
    assert shmax >= shmin - 1e-9
    b = sc.regime_bounds(sv, pp, mu, regime)
    assert b["shmax_lower_mpa"] - 1e-9 <= shmax <= b["shmax_upper_mpa"] + 1e-9
    assert b["shmin_lower_mpa"] - 1e-9 <= shmin <= b["shmin_upper_mpa"] + 1e-9
    expected_code = {"normal": 0, "strike-slip": 1, "reverse": 2}[regime]
    if 0.0 < phi < 1.0:
        assert sc.regime_from_magnitudes(shmax, shmin, sv) == expected_code


def test_estimates_vectorise_over_samples(site):
    n = 1000
    rng = np.random.default_rng(1)
    mu = rng.uniform(0.4, 0.9, n)
    codes = rng.integers(0, 3, n)
    phi = rng.uniform(0, 1, n)
    shmax, shmin = sc.frictional_equilibrium(site["sv"], site["pp"], mu, codes, phi)
    assert shmax.shape == shmin.shape == (n,)
    assert_allclose(sc.frictional_ratio(shmax, shmin, site["sv"], site["pp"]),
                    sc.frictional_limit_ratio(mu), rtol=1e-9)


def test_complete_magnitudes_keeps_measured_values(site):
    sv, pp, mu = site["sv"], site["pp"], site["mu"]
    q = sc.frictional_limit_ratio(mu)
    both = sc.complete_magnitudes(sv, pp, mu, "normal", 0.5, shmax_mpa=60.0, shmin_mpa=50.0)
    assert_allclose(both, [60.0, 50.0])
    # strike-slip, measured Shmin (e.g. from a leak-off test): SHmax at the limit
    shmax, shmin = sc.complete_magnitudes(sv, pp, mu, "strike-slip", 0.5, shmin_mpa=48.0)
    assert_allclose([shmax, shmin], [pp + q * (48.0 - pp), 48.0])
    # normal, measured Shmin: SHmax from the shape ratio with S1 = Sv
    shmax, _ = sc.complete_magnitudes(sv, pp, mu, "normal", 0.25, shmin_mpa=48.0)
    assert_allclose(shmax, 48.0 + 0.25 * (sv - 48.0))
    # nothing given: the central estimate
    assert_allclose(sc.complete_magnitudes(sv, pp, mu, "reverse", 0.4),
                    sc.frictional_equilibrium(sv, pp, mu, "reverse", 0.4))


def test_regime_names_and_errors():
    assert sc.regime_code_of(["normal", "REVERSE", "strike_slip"]).tolist() == [0, 2, 1]
    with pytest.raises(InputError) as err:
        sc.regime_code_of("oblique")
    assert err.value.problems[0]["field"] == "regime"
    assert sc.regime_code_of(np.array([2, 0, 1])).tolist() == [2, 0, 1]  # codes of samples
    with pytest.raises(InputError):
        sc.regime_code_of(np.array([0, 3]))


@pytest.mark.parametrize("az", [0.0, 30.0, 90.0, 135.0, 179.0])
def test_principal_tensor_matches_scipy_rotation(az):
    # Independent check: rotate diag(SHmax, Shmin, Sv) about the down axis by the azimuth with
    # scipy.spatial.transform.Rotation (NED: +rotation about "down" turns north toward east).
    from scipy.spatial.transform import Rotation

    r = Rotation.from_euler("z", az, degrees=True).as_matrix()
    expected = r @ np.diag([90.0, 50.0, 70.0]) @ r.T
    assert_allclose(sc.principal_tensor_ned(90.0, 50.0, 70.0, az), expected, atol=1e-12)
