"""Column GPE (stressmap.physics.gpe) against closed forms from the literature and scipy."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate

from stressmap.physics import forces, gpe


@pytest.mark.parametrize("model", ["half_space", "plate"])
def test_gpe_drop_from_ridge_to_old_ocean_is_the_ridge_push(model):
    """The GPE difference between the ridge column and an older oceanic column equals the
    closed-form ridge push (Turcotte & Schubert, Geodynamics 2nd ed., ridge-push section;
    Parsons & Richter 1980; both from memory) within 1 %."""
    ages = np.array([10.0, 40.0, 80.0, 120.0, 160.0])
    u = gpe.oceanic_gpe_n_per_m(np.r_[0.0, ages], model=model)
    drop = u[0] - u[1:]
    assert_allclose(drop, forces.ridge_push_n_per_m(ages, model=model), rtol=0.01)
    assert np.all(np.diff(u) < 0)  # older ocean: lower GPE


def _plateau_closed_form(h_m, rho_c=2800.0, rho_m=3300.0, h0_m=35e3, g=9.81):
    """Airy-compensated plateau of height h over a reference crust H0 at sea level:
    dU = rho_c g h (H0 + h rho_m / (2 (rho_m - rho_c)))  (Molnar & Lyon-Caen 1988, GSA Spec.
    Pap. 218; also Turcotte & Schubert's isostasy problems; from memory)."""
    return rho_c * g * h_m * (h0_m + h_m * rho_m / (2.0 * (rho_m - rho_c)))


def test_airy_plateau_gpe_matches_the_closed_form():
    h = np.array([1e3, 3e3, 5e3])
    got = gpe.airy_gpe_n_per_m(h)
    assert_allclose(got, _plateau_closed_form(h), rtol=1e-9)
    # the numbers quoted in the README / docstring: 1.05, 3.70, 7.07 x 1e12 N/m
    assert_allclose(got / 1e12, [1.052, 3.700, 7.073], atol=0.001)


def test_airy_gpe_is_the_integral_of_the_lithostatic_stress():
    """Independent integration (scipy.integrate.quad) of sigma_zz(z) = g int rho dz over the
    column down to a compensation depth, minus the same for the reference column."""
    rho_c, rho_m, g, h0 = 2800.0, 3300.0, 9.81, 35e3
    zc = 150e3

    def gpe_of(top, moho):
        def rho(z):
            return rho_c if z < moho else rho_m

        def szz(z):  # overburden from the top of the column
            return g * integrate.quad(rho, top, z, points=[moho] if top < moho < z else None)[0]

        return integrate.quad(szz, top, zc, points=[moho], limit=200)[0]

    ref = gpe_of(0.0, h0)
    for h in (2e3, 4e3):
        moho = h0 + h * rho_c / (rho_m - rho_c)
        assert_allclose(gpe_of(-h, moho) - ref, gpe.airy_gpe_n_per_m(h), rtol=1e-6)


def test_isostatic_columns_do_not_depend_on_the_compensation_depth():
    e = np.array([-3000.0, -500.0, 0.0, 800.0, 4500.0])
    a = gpe.airy_gpe_n_per_m(e, {"compensation_depth_km": 100.0})
    b = gpe.airy_gpe_n_per_m(e, {"compensation_depth_km": 250.0})
    assert_allclose(a, b, rtol=1e-9, atol=1e3)


def test_crust_mode_reproduces_airy_for_airy_crust_and_shifts_with_extra_crust():
    e = np.array([0.0, 1500.0, 3000.0])
    moho = gpe.airy_moho_m(e)
    crust_km = (moho + e) / 1e3  # crustal thickness from the surface to the Moho
    assert_allclose(gpe.crust_gpe_n_per_m(e, crust_km), gpe.airy_gpe_n_per_m(e), rtol=1e-9)
    # thicker crust at the same elevation is balanced by denser mantle: different GPE
    assert not np.allclose(gpe.crust_gpe_n_per_m(e, crust_km + 5.0), gpe.airy_gpe_n_per_m(e))


def test_bad_parameters_are_named():
    from stressmap.errors import InputError

    with pytest.raises(InputError) as err:
        gpe.gpe_params({"crust_density_kg_m3": 3400.0})
    assert err.value.problems[0]["field"] == "gpe.crust_density_kg_m3"
    with pytest.raises(InputError):
        gpe.gpe_params({"no_such_key": 1.0})


def test_column_gpe_mixes_land_and_ocean_columns():
    u = gpe.column_gpe_n_per_m([3000.0, 0.0, 0.0], age_myr=[np.nan, np.nan, 50.0],
                               oceanic=[False, False, True])
    assert u[0] > u[1] > u[2]
    with pytest.raises(Exception):
        gpe.column_gpe_n_per_m(None, age_myr=[1.0], oceanic=[False])
