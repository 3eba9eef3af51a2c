"""Horizontal tensor algebra against independent computations (numpy.linalg.eigh, brute force)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from stressmap.geo import tensor


def test_principal_values_match_numpy_eigh():
    # Independent reference: eigenvalues of the 2x2 symmetric matrix by LAPACK (numpy.linalg.eigh).
    rng = np.random.default_rng(1)
    s = rng.normal(size=(3, 500)) * 50
    mats = np.stack([np.stack([s[0], s[2]], -1), np.stack([s[2], s[1]], -1)], -2)
    eig = np.linalg.eigh(mats)[0]
    hmax, hmin = tensor.horizontal_principal(*s)
    assert_allclose(hmax, eig[:, 1], rtol=1e-12, atol=1e-9)
    assert_allclose(hmin, eig[:, 0], rtol=1e-12, atol=1e-9)


def test_azimuth_maximises_horizontal_normal_stress_brute_force():
    # Independent reference: scan azimuths at 0.01 degree and keep the most compressive direction.
    rng = np.random.default_rng(2)
    s = rng.normal(size=(3, 200))
    az = np.arange(0.0, 180.0, 0.01)
    a = np.radians(az)[:, None]
    sn = s[0] * np.sin(a) ** 2 + s[1] * np.cos(a) ** 2 + 2 * s[2] * np.sin(a) * np.cos(a)
    best = az[np.argmax(sn, axis=0)]
    got = tensor.shmax_azimuth_deg(*s)
    diff = np.mod(got - best + 90.0, 180.0) - 90.0
    assert np.all(np.abs(diff) < 0.02)


@settings(max_examples=200, deadline=None)
@given(
    hmax=st.floats(-100, 100),
    delta=st.floats(0.01, 100),
    az=st.floats(0, 179.99),
)
def test_components_round_trip(hmax, delta, az):
    hmin = hmax - delta
    comps = tensor.components_from_principal(hmax, hmin, az)
    d = tensor.describe(*comps)
    assert_allclose([d["s_hmax"], d["s_hmin"]], [hmax, hmin], atol=1e-9 * (1 + abs(hmax)))
    err = np.mod(d["shmax_azimuth_deg"] - az + 90.0, 180.0) - 90.0
    assert abs(err) < 1e-6


@pytest.mark.parametrize(
    "hmax, hmin, name",
    [(10.0, 2.0, "reverse"), (10.0, -2.0, "strike-slip"), (-1.0, -5.0, "normal")],
)
def test_anderson_regime(hmax, hmin, name):
    # Anderson (1951) classification with vertical tectonic stress 0 (README, Conventions) -- common practice.
    assert tensor.regime(hmax, hmin) == name


def test_regime_index_spans_simpson_scale():
    # Simpson (1997): 0 radial extension, 1 strike-slip at phi=1..., 3 radial compression (from memory).
    hmax = np.array([-1.0, 0.0, 5.0, 5.0, 5.0])
    hmin = np.array([-1.0, -5.0, -5.0, 0.0, 5.0])
    assert_allclose(tensor.regime_index(hmax, hmin), [0.0, 1.0, 1.5, 2.0, 3.0], atol=1e-12)
