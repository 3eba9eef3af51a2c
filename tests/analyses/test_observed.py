"""Observed SHmax grid: checked against a brute-force computation with pyproj geodesic distances
(an independent library) on a sphere of radius 6371 km, against known synthetic fields, and for
its acceptance rules and CF / GeoJSON outputs."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses import observed
from stressmap.constants import CAUTION
from stressmap.errors import InputError
from stressmap.formats.observed import observed_geojson, observed_netcdf_bytes


@pytest.fixture(scope="module")
def cloud():
    rng = np.random.default_rng(5)
    n = 300
    return pd.DataFrame({
        "lon": rng.uniform(0.0, 10.0, n),
        "lat": rng.uniform(40.0, 48.0, n),
        "shmax_azimuth_deg": np.mod(rng.normal(170.0, 12.0, n), 180.0),   # straddles 0/180
        "weight": rng.uniform(0.3, 3.0, n),
    })


def brute_force(node_lon, node_lat, frame, radius_km):
    """Loop-per-node reference: pyproj geodesic distances on a sphere, explicit complex sums."""
    from pyproj import Geod

    geod = Geod(a=6371000.0, b=6371000.0)
    n = len(frame)
    _, _, dist_m = geod.inv(np.full(n, node_lon), np.full(n, node_lat),
                            frame["lon"].to_numpy(), frame["lat"].to_numpy())
    d = dist_m / 1000.0
    inside = d <= radius_km
    w = (1 - (d[inside] / radius_km) ** 3) ** 3 * frame["weight"].to_numpy()[inside]
    z = np.sum(w * np.exp(2j * np.radians(frame["shmax_azimuth_deg"].to_numpy()[inside])))
    r = abs(z) / np.sum(w)
    mean = np.mod(np.degrees(np.angle(z)) / 2.0, 180.0)
    std = np.degrees(np.sqrt(-2 * np.log(r)) / 2.0)
    return mean, int(inside.sum()), std


def test_grid_matches_brute_force(cloud):
    ds = observed.observed_grid(cloud, bbox=(1, 41, 9, 47), radius_km=150.0, spacing_km=150.0,
                                min_count=1, max_halfwidth_deg=np.inf)
    lon2, lat2 = np.meshgrid(ds["lon"].values, ds["lat"].values)
    for i in range(0, lon2.size, max(1, lon2.size // 12)):
        mean, count, std = brute_force(lon2.ravel()[i], lat2.ravel()[i], cloud, 150.0)
        j = np.unravel_index(i, lon2.shape)
        assert int(ds["count"].values[j]) == count
        assert abs(np.mod(ds["shmax_azimuth_deg"].values[j] - mean + 90, 180) - 90) < 1e-6
        assert_allclose(ds["dispersion_deg"].values[j], std, rtol=1e-6)


def test_uniform_field_recovers_mean_and_noise(cloud):
    ds = observed.observed_grid(cloud, bbox=(2, 42, 8, 46), radius_km=300.0, spacing_km=200.0)
    m = ds["shmax_azimuth_deg"].values
    assert np.all(np.isfinite(m))
    assert np.all(np.abs(np.mod(m - 170.0 + 90, 180) - 90) < 5.0)   # true mean 170, not ~90
    # Axial std of wrapped normal noise of 12 deg is ~12 deg (small-angle; Mardia & Jupp 2000).
    assert np.all(np.abs(ds["dispersion_deg"].values - 12.0) < 4.0)


def test_acceptance_rules_and_status():
    frame = pd.DataFrame({"lon": [0.0, 0.05, 0.0, 5.0, 5.02],
                          "lat": [0.0, 0.0, 0.05, 0.0, 0.0],
                          "shmax_azimuth_deg": [10.0, 12.0, 8.0, 0.0, 60.0],
                          "weight": [1.0, 1.0, 1.0, 1.0, 1.0]})
    out = observed.smooth_at([0.0, 5.0, 20.0, 0.0], [0.0, 0.0, 0.0, 0.0], frame["lon"], frame["lat"],
                             frame["shmax_azimuth_deg"], frame["weight"], radius_km=50.0,
                             min_count=2, max_halfwidth_deg=20.0)
    assert out["count"].tolist() == [3, 2, 0, 3]
    assert out["status"].tolist() == [0, 3, 1, 0]
    assert np.isnan(out["shmax_azimuth_deg"][1]) and np.isfinite(out["dispersion_deg"][1])
    strict = observed.smooth_at([0.0], [0.0], frame["lon"], frame["lat"], frame["shmax_azimuth_deg"],
                                radius_km=50.0, min_count=4)
    assert strict["status"].tolist() == [2] and np.isnan(strict["shmax_azimuth_deg"][0])


def test_uncertainty_weighting_pulls_the_mean():
    lon = np.zeros(2)
    lat = np.zeros(2)
    az = np.array([0.0, 40.0])
    heavy = observed.smooth_at([0.0], [0.0], lon, lat, az, [9.0, 1.0], radius_km=10.0, min_count=1,
                               max_halfwidth_deg=np.inf)
    ref = np.degrees(np.angle(9 * np.exp(0j) + 1 * np.exp(2j * np.radians(40.0)))) / 2
    assert_allclose(heavy["shmax_azimuth_deg"], ref, atol=1e-9)


def test_antimeridian_bbox():
    frame = pd.DataFrame({"lon": [179.9, -179.9, 179.95], "lat": [0.0, 0.0, 0.1],
                          "shmax_azimuth_deg": [30.0, 32.0, 28.0], "weight": [1.0, 1.0, 1.0]})
    ds = observed.observed_grid(frame, bbox=(179.0, -1.0, -179.0, 1.0), radius_km=60.0, spacing_km=50.0)
    assert ds["lon"].values[0] == 179.0 and ds["lon"].values[-1] > 180.0
    assert np.nanmax(ds["count"].values) == 3


def test_outputs_cf_netcdf_and_geojson(cloud):
    ds = observed.observed_grid(cloud, bbox=(0, 40, 10, 48), radius_km=120.0)
    data = observed_netcdf_bytes(ds)
    back = _open_nc(data)
    assert back.attrs["Conventions"] == "CF-1.8"
    assert back["lat"].attrs["units"] == "degrees_north"
    assert back["shmax_azimuth_deg"].attrs["units"] == "degree"
    assert_allclose(back["count"].values, ds["count"].values)
    back.close()
    fc = observed_geojson(ds)
    assert fc["caution"] == CAUTION
    assert len(fc["features"]) == int((ds["count"].values > 0).sum())
    props = fc["features"][0]["properties"]
    assert set(props) == {"shmax_azimuth_deg", "count", "effective_count", "dispersion_deg",
                          "halfwidth_deg", "mean_resultant_length", "status"}
    assert "max_halfwidth_deg" in fc and "max_dispersion_deg" not in fc


def _open_nc(data):
    import os
    import tempfile

    import xarray as xr

    fd, path = tempfile.mkstemp(suffix=".nc")
    os.write(fd, data)
    os.close(fd)
    ds = xr.open_dataset(path, engine="netcdf4").load()
    os.unlink(path)
    return ds


@pytest.mark.parametrize("bbox", [(0, 10, 5), (0, 50, 5, 40), (0, 0, 0, 5), ("a", 0, 1, 1), (0, -95, 1, 1)])
def test_bad_bbox(bbox):
    with pytest.raises(InputError) as err:
        observed.grid_axes(bbox, 10.0)
    assert err.value.problems[0]["field"] == "bbox"


def test_bad_radius_and_too_many_nodes(cloud):
    with pytest.raises(InputError) as err:
        observed.smooth_at([0.0], [0.0], [0.0], [0.0], [0.0], radius_km=0.0)
    assert err.value.problems[0]["field"] == "radius_km"
    with pytest.raises(InputError) as err:
        observed.smooth_at([0.0], [0.0], [0.0], [0.0], [0.0], radius_km=5.0, min_count=0)
    assert err.value.problems[0]["field"] == "min_count"
    with pytest.raises(InputError) as err:
        observed.smooth_at([0.0], [0.0], [0.0], [0.0], [0.0], radius_km=5.0, max_halfwidth_deg=-1)
    assert err.value.problems[0]["field"] == "max_halfwidth_deg"
    with pytest.raises(InputError) as err:
        observed.grid_axes((0, 0, 50, 50), 1.0, max_nodes=1000)
    assert err.value.problems[0]["field"] == "spacing_km"


def test_no_indicators_gives_empty_grid():
    frame = pd.DataFrame({"lon": [], "lat": [], "shmax_azimuth_deg": [], "weight": []})
    ds = observed.observed_grid(frame, bbox=(0, 0, 1, 1), radius_km=50.0)
    assert int(ds["count"].values.sum()) == 0 and np.all(ds["status"].values == 1)



# -- the acceptance defaults come from our own statistics -------------------------------------

def test_halfwidth_is_a_95_percent_confidence_interval_of_the_node_mean():
    # Coverage check by simulation (scipy.stats.vonmises, an independent sampler): for doubled
    # angles drawn about a known mean, the node's mean +- halfwidth_deg holds the true axis in
    # about 95 % of repeated samples (binomial 3-sigma band for 600 repetitions: +-2.7 %).
    from scipy.stats import vonmises

    n, reps, true = 25, 600, 40.0
    rng = np.random.default_rng(11)
    doubled = vonmises.rvs(kappa=3.0, loc=np.radians(2 * true), size=(reps, n), random_state=rng)
    az = np.mod(np.degrees(doubled) / 2.0, 180.0)
    nodes = -170.0 + 0.5 * np.arange(reps)       # every repetition its own node, 55 km apart
    out = observed.smooth_at(nodes, np.zeros(reps), np.repeat(nodes, n), np.zeros(reps * n),
                             az.ravel(), radius_km=1.0, min_count=1, max_halfwidth_deg=90.0)
    assert_allclose(out["effective_count"], n)
    miss = np.abs(np.mod(out["shmax_azimuth_deg"] - true + 90.0, 180.0) - 90.0)
    covered = np.mean(miss <= out["halfwidth_deg"])
    assert abs(covered - 0.95) < 0.027


def test_default_minimum_count_from_the_rayleigh_test():
    # The default minimum count: the fewest indicators whose mean, just meeting the half-width
    # limit, rejects uniform orientations at 1 %. Checked against the Rayleigh statistic's null
    # distribution simulated from uniform random axes (numpy), not against our formula.
    from scipy.stats import t

    rng = np.random.default_rng(3)
    h = observed.DEFAULT_MAX_HALFWIDTH_DEG
    n_min = observed.DEFAULT_MIN_COUNT
    assert n_min == observed.minimum_count(h, observed.SIGNIFICANCE) == 5

    def null_r(n):                                # R of n uniform random axes (doubled angles)
        two = rng.uniform(0, 2 * np.pi, (200_000, n))
        return np.hypot(np.cos(two).mean(1), np.sin(two).mean(1))

    for n in (3, 4, 5, 6, 8):
        r_limit = np.exp(-2.0 * (np.radians(h) * np.sqrt(n) / t.ppf(0.975, n - 1)) ** 2)
        simulated = np.mean(null_r(n) >= r_limit)
        approx = float(observed.rayleigh_p_value(r_limit, n))
        assert approx >= simulated - 0.001        # the approximation errs on the safe side
        if n == n_min:
            assert simulated < observed.SIGNIFICANCE and approx < observed.SIGNIFICANCE
    # the old fixed pair (3 indicators, 25 degrees) is gone from the defaults
    assert "max_dispersion_deg" not in observed.observed_grid.__code__.co_varnames
