"""Specification of stressmap.units against the published definitions of oilfield units."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.errors import InputError
from stressmap.units import (check_units, convert_stress_table, emw_ppg, km_to_ft,
                             mpa_per_km_to_psi_per_ft, mpa_to_psi)


def test_published_definitions():
    # NIST SP 811: 1 psi = 6894.757 Pa; 1 ft = 0.3048 m (exact);
    # 1 ppg = 0.051948 psi/ft (oilfield constant, common practice)
    assert_allclose(mpa_to_psi(6894.757e-6), 1.0, rtol=1e-12)
    assert_allclose(km_to_ft(0.3048e-3), 1.0, rtol=1e-12)
    assert_allclose(emw_ppg(psi=0.051948 * 1000.0, depth_ft=1000.0), 1.0, rtol=1e-12)
    # fresh-water hydrostatic, 9.81 MPa/km, is about 0.434 psi/ft and 8.35 ppg (common practice)
    assert_allclose(mpa_per_km_to_psi_per_ft(9.81), 0.4337, atol=5e-4)
    assert_allclose(emw_ppg(mpa=9.81, depth_km=1.0), 8.35, atol=0.01)


def test_table_conversion_renames_and_adds_mud_weight():
    cols = {"depth_km": np.array([1.0, 2.0]), "sv_mpa": np.array([24.0, 48.0]), "regime": ["a", "b"]}
    out = convert_stress_table(cols, "oilfield", depth_km=cols["depth_km"])
    assert set(out) == {"depth_ft", "sv_psi", "sv_emw_ppg", "regime"}
    assert_allclose(out["sv_emw_ppg"][0], out["sv_emw_ppg"][1])
    assert convert_stress_table(cols, "si") == cols


@pytest.mark.parametrize("bad", ["imperial", 3, ""])
def test_unknown_unit_system_is_refused(bad):
    with pytest.raises(InputError) as err:
        check_units(bad)
    assert err.value.problems[0]["field"] == "units"
