"""Cooling models against published depth-age relations, analytic results and scipy.

Sources beside each check: Turcotte & Schubert, Geodynamics (2nd ed., 2002; "T&S", from memory),
Parsons & Sclater (1977, J. Geophys. Res. 82, 803; from memory), Stein & Stein (1992, Nature 359,
123; GDH1, from memory), and independent evaluations with scipy (special.erf, integrate.quad,
integrate.solve_ivp).
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate, sparse, special

from stressmap.physics import thermal
from stressmap.constants import SECONDS_PER_MYR
from stressmap.errors import InputError

# Textbook half-space constants (T&S ch. 4 and 6, from memory), written out here so the checks do
# not depend on the packaged defaults.
TEXTBOOK = {
    "surface_temperature_c": 0.0,
    "mantle_temperature_c": 1300.0,
    "diffusivity_m2_s": 1e-6,
    "expansivity_per_k": 3e-5,
    "mantle_density_kg_m3": 3300.0,
    "water_density_kg_m3": 1000.0,
}
# GDH1 (Stein & Stein 1992, from memory).
GDH1 = {
    "plate_thickness_km": 95.0,
    "surface_temperature_c": 0.0,
    "mantle_temperature_c": 1450.0,
    "diffusivity_m2_s": 3.138 / (3330.0 * 1171.0),
    "expansivity_per_k": 3.1e-5,
    "mantle_density_kg_m3": 3330.0,
    "water_density_kg_m3": 1000.0,
    "ridge_depth_km": 2.6,
}


@pytest.fixture
def textbook():
    return {"half_space": dict(TEXTBOOK)}


@pytest.fixture
def gdh1():
    return {"plate_model": dict(GDH1)}


# --------------------------------------------------------------------------- temperature


def test_half_space_temperature_matches_scipy_erf(textbook):
    # Independent evaluation: T = T0 + (Tm - T0) erf(z / (2 sqrt(kappa t))) with scipy.special.erf
    # (T&S ch. 4, from memory).
    z_km = np.linspace(0.0, 200.0, 41)[:, None]
    age = np.array([0.5, 5.0, 40.0, 120.0])[None, :]
    expected = 1300.0 * special.erf(z_km * 1e3 / (2.0 * np.sqrt(1e-6 * age * SECONDS_PER_MYR)))
    got = thermal.half_space_temperature_c(z_km, age, textbook)
    assert got.shape == (41, 4)
    assert_allclose(got, expected, rtol=0, atol=1e-9)


def test_half_space_temperature_at_zero_age_is_a_step(textbook):
    # Analytic initial condition: the ridge column is at Tm below the seafloor, T0 at it.
    assert_allclose(thermal.half_space_temperature_c([0.0, 0.1, 50.0], 0.0, textbook), [0.0, 1300.0, 1300.0])


def test_plate_temperature_matches_finite_difference_heat_equation(gdh1):
    # Independent solution: method of lines for dT/dt = kappa d2T/dz2 on 0 < z < a with T(0) = T0,
    # T(a) = Tm, T(z, 0) = Tm, integrated by scipy.integrate.solve_ivp (BDF).
    a = 95e3
    kappa = GDH1["diffusivity_m2_s"]
    n = 380
    z = np.linspace(0.0, a, n + 1)
    h = z[1] - z[0]
    lap = sparse.diags([1.0, -2.0, 1.0], [-1, 0, 1], shape=(n - 1, n - 1), format="csc") * (kappa / h**2)
    bc = np.zeros(n - 1)
    bc[-1] = kappa / h**2 * 1450.0  # base held at Tm; top at 0 C contributes nothing

    def rhs(_, y):
        return lap @ y + bc

    ages = np.array([5.0, 30.0, 100.0])
    sol = integrate.solve_ivp(rhs, (0.0, ages[-1] * SECONDS_PER_MYR), np.full(n - 1, 1450.0),
                              method="BDF", jac=lap, t_eval=ages * SECONDS_PER_MYR, rtol=1e-8, atol=1e-6)
    assert sol.success
    got = thermal.plate_temperature_c(z[1:-1, None] / 1e3, ages[None, :], gdh1)
    assert_allclose(got, sol.y, atol=1.0)  # kelvin; discretisation error of the reference


def test_plate_temperature_steady_state_is_linear(gdh1):
    # Analytic steady state of conduction through a layer: a straight line from T0 to Tm.
    z = np.linspace(0.0, 95.0, 11)
    assert_allclose(thermal.plate_temperature_c(z, 5000.0, gdh1), 1450.0 * z / 95.0, atol=1e-6)
    # below the plate the temperature is the mantle temperature
    assert_allclose(thermal.plate_temperature_c([120.0, 300.0], 50.0, gdh1), [1450.0, 1450.0])


def test_temperature_broadcasts_ages_against_depths():
    # Vectorised: a (depth, 1) column and an (age,) row give a (depth, age) table; scalars give 0-d.
    out = thermal.temperature_c(np.linspace(0, 100, 7)[:, None], np.array([1.0, 10.0, 100.0]), model="plate")
    assert out.shape == (7, 3)
    assert np.ndim(thermal.temperature_c(10.0, 10.0)) == 0
    assert thermal.thermal_thickness_km(np.ones((2, 3))).shape == (2, 3)


# --------------------------------------------------------------------------- thickness


def test_half_space_thermal_thickness_is_2_32_sqrt_kappa_t(textbook):
    # T&S ch. 4 (from memory): the 0.9 isotherm lies at 2.32 sqrt(kappa t).
    age = np.array([1.0, 10.0, 100.0])
    expected = 2.32 * np.sqrt(1e-6 * age * SECONDS_PER_MYR) / 1e3
    assert_allclose(thermal.thermal_thickness_km(age, params=textbook), expected, rtol=3e-3)


@pytest.mark.parametrize("model", ["half_space", "plate"])
def test_thermal_thickness_sits_on_the_isotherm(model):
    # Definition check with an independent temperature evaluation: T(thickness) = T0 + 0.9 (Tm - T0).
    age = np.array([2.0, 30.0, 150.0])
    d = thermal.thermal_thickness_km(age, model=model)
    c = thermal.model_constants(model)
    assert_allclose(thermal.temperature_c(d, age, model=model), c["t0_c"] + 0.9 * c["dt_k"], atol=1e-6)


# --------------------------------------------------------------------------- subsidence


def test_half_space_subsidence_matches_parsons_sclater_350_m_per_sqrt_myr(textbook):
    # Parsons & Sclater (1977): d(t) = 2500 + 350 sqrt(t) m for t < 70 Myr (from memory);
    # half-space cooling with the textbook constants must reproduce the slope within 3 %.
    age = np.array([1.0, 4.0, 16.0, 36.0, 64.0])
    slope = thermal.subsidence_km(age, params=textbook) * 1e3 / np.sqrt(age)
    assert_allclose(slope, 350.0, rtol=0.03)
    textbook["half_space"]["ridge_depth_km"] = 2.5
    assert_allclose(thermal.seafloor_depth_km(age, params=textbook) * 1e3, 2500.0 + 350.0 * np.sqrt(age), rtol=0.03)


@pytest.mark.parametrize("model", ["half_space", "plate"])
def test_subsidence_equals_isostatic_integral_by_quad(model):
    # Independent isostasy: w = rho_m alpha / (rho_m - rho_w) * integral (Tm - T) dz, integrated by
    # scipy.integrate.quad over the package temperature profile.
    c = thermal.model_constants(model)
    for age in (3.0, 40.0, 160.0):
        top = 95.0 if model == "plate" else 1000.0
        deficit, _ = integrate.quad(lambda z: c["tm_c"] - float(thermal.temperature_c(z, age, model=model)),
                                    0.0, top, limit=200)
        w = c["rho_m"] * c["alpha"] * deficit / (c["rho_m"] - c["rho_w"])
        assert_allclose(thermal.subsidence_km(age, model=model), w, rtol=1e-6)


def test_plate_model_reproduces_gdh1_depth_age_relation(gdh1):
    # Stein & Stein (1992), GDH1 (from memory): d = 2600 + 365 sqrt(t) for t < 20 Myr,
    # d = 5651 - 2473 exp(-0.0278 t) for t >= 20 Myr (metres).
    young = np.array([1.0, 5.0, 10.0, 19.0])
    old = np.array([20.0, 50.0, 100.0, 150.0, 200.0])
    assert_allclose(thermal.seafloor_depth_km(young, "plate", gdh1) * 1e3, 2600.0 + 365.0 * np.sqrt(young), rtol=0.005)
    assert_allclose(thermal.seafloor_depth_km(old, "plate", gdh1) * 1e3, 5651.0 - 2473.0 * np.exp(-0.0278 * old), rtol=0.005)


def test_plate_subsidence_flattens_with_age(gdh1):
    # Plate model property (Parsons & Sclater 1977): subsidence rises ever more slowly and tends to
    # the analytic steady value rho_m alpha (Tm - T0) a / (2 (rho_m - rho_w)).
    age = np.linspace(0.0, 300.0, 301)
    w = thermal.subsidence_km(age, "plate", gdh1)
    dw = np.diff(w)
    assert np.all(dw > 0)
    assert np.all(np.diff(dw) < 0)
    w_inf = 3330.0 * 3.1e-5 * 1450.0 * 95.0 / (2.0 * 2330.0)
    assert_allclose(w[-1], w_inf, rtol=2e-3)
    # and it falls ever further below half-space cooling with the same constants
    hs = {"half_space": {k: v for k, v in GDH1.items() if k != "plate_thickness_km"}}
    ratio = w[1:] / thermal.subsidence_km(age[1:], "half_space", hs)
    assert np.all(np.diff(ratio) <= 1e-12)
    assert ratio[-1] < 0.6


def test_plate_matches_half_space_when_young(gdh1):
    # Analytic limit: before the cooling front reaches the plate base (t << a^2 / kappa) the plate
    # model is half-space cooling (T&S ch. 4, from memory). Same constants for both.
    hs = {"half_space": {k: v for k, v in GDH1.items() if k != "plate_thickness_km"}}
    age = np.array([0.5, 2.0, 5.0, 10.0, 15.0])
    assert_allclose(thermal.subsidence_km(age, "plate", gdh1), thermal.subsidence_km(age, "half_space", hs), rtol=5e-3)
    z = np.linspace(0.0, 60.0, 13)[:, None]
    assert_allclose(thermal.temperature_c(z, age, "plate", gdh1), thermal.temperature_c(z, age, "half_space", hs), atol=0.5)


def test_plate_series_is_continuous_across_the_half_space_switch(gdh1):
    # The two exact representations (half-space while the base is unfelt, series after) must join:
    # sample ages finely around pi^2 kappa t / a^2 = 0.1 and require a smooth curve.
    kappa = GDH1["diffusivity_m2_s"]
    t_switch = 0.1 * (95e3) ** 2 / (np.pi**2 * kappa) / SECONDS_PER_MYR
    age = t_switch * np.array([0.999, 0.9999, 1.0001, 1.001])
    w = thermal.subsidence_km(age, "plate", gdh1)
    # d w / d t for half-space at t_switch: w / (2 t)
    slope = w[0] / (2 * age[0])
    assert_allclose(np.diff(w) / np.diff(age), slope, rtol=1e-3)


def test_integrated_density_anomaly_is_subsidence_times_density_contrast():
    # Isostasy (Archimedes): the excess mass of the cooled column equals the displaced water deficit.
    age = np.array([10.0, 80.0])
    for model in ("half_space", "plate"):
        c = thermal.model_constants(model)
        assert_allclose(thermal.integrated_density_anomaly_kg_m2(age, model),
                        (c["rho_m"] - c["rho_w"]) * thermal.subsidence_km(age, model) * 1e3, rtol=1e-12)


# --------------------------------------------------------------------------- input errors


def test_negative_age_is_a_clear_input_error():
    with pytest.raises(InputError, match="age_myr must be >= 0") as err:
        thermal.subsidence_km([10.0, -1.0])
    assert err.value.problems[0]["field"] == "age_myr"


def test_unknown_model_and_parameter_are_named():
    with pytest.raises(InputError, match="unknown cooling model 'mantle'"):
        thermal.temperature_c(1.0, 1.0, model="mantle")
    with pytest.raises(InputError) as err:
        thermal.resolve_params({"half_space": {"kappa": 1e-6, "mantle_density_kg_m3": "heavy"}, "crust": {}})
    fields = {p["field"] for p in err.value.problems}
    assert fields == {"half_space.kappa", "half_space.mantle_density_kg_m3", "crust"}


def test_unphysical_constants_are_rejected():
    with pytest.raises(InputError, match="below the mantle density"):
        thermal.model_constants("half_space", {"half_space": {"water_density_kg_m3": 3500.0}})
    with pytest.raises(InputError, match="must be positive"):
        thermal.model_constants("plate", {"plate_model": {"plate_thickness_km": 0.0}})
