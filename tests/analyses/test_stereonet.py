"""Specification of stressmap.analyses.stereonet: tendencies on a lower-hemisphere equal-area net."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.analyses.screening import principal_tensor_ned
from stressmap.analyses.stereonet import pole_of_plane, project_pole, tendency_net, unproject


def test_tendencies_at_the_poles_of_the_principal_planes():
    # analytic: a plane normal to a principal stress carries no shear (Ts = 0); dilation
    # tendency is 0 on the plane normal to sigma_1 and 1 on the plane normal to sigma_3
    # (Ferrill et al. 1999)
    s = principal_tensor_ned(90.0, 40.0, 60.0, 0.0)     # s1 = SHmax north, s3 = Shmin east
    net = tendency_net(s, 20.0, size=201)
    centre = (100, 100)                                   # vertical pole: Sv, sigma_2
    north, east = (200, 100), (100, 200)                  # rows follow y (north), columns x (east)
    assert_allclose(net["slip_tendency"][centre], 0.0, atol=1e-12)
    assert_allclose(net["slip_tendency"][north], 0.0, atol=1e-12)
    assert_allclose(net["dilation_tendency"][north], 0.0, atol=1e-12)
    assert_allclose(net["dilation_tendency"][east], 1.0, atol=1e-12)
    assert_allclose(net["dilation_tendency"][centre], (90.0 - 60.0) / (90.0 - 40.0), atol=1e-12)
    assert np.isnan(net["slip_tendency"][0, 0])           # corner: outside the net


def test_greatest_slip_tendency_is_the_frictional_optimum():
    # Jaeger & Cook: the plane of greatest tau / sigma_n' has tau/sigma_n' =
    # (s1' - s3') / (2 sqrt(s1' s3')) (analytic, for s2 free)
    s = principal_tensor_ned(90.0, 40.0, 60.0, 0.0)
    net = tendency_net(s, 20.0, size=401)
    s1, s3 = 70.0, 20.0
    assert_allclose(np.nanmax(net["slip_tendency"]), (s1 - s3) / (2 * np.sqrt(s1 * s3)),
                    rtol=2e-3)


@pytest.mark.parametrize("strike, dip", [(0, 60), (45, 30), (200, 85), (310, 10), (90, 0)])
def test_pole_and_projection_against_mplstereonet(strike, dip):
    # mplstereonet (MIT, a general-purpose stereonet library): pole plunge/bearing of a plane,
    # and the position on its lower-hemisphere equal-area net (Lambert azimuthal equal area)
    import warnings

    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    with warnings.catch_warnings():  # its axes override Axes.cla (pending deprecation upstream)
        warnings.simplefilter("ignore", PendingDeprecationWarning)
        import mplstereonet  # noqa: F401  (registers the projection)
        from mplstereonet import stereonet_math

    plunge, bearing = stereonet_math.pole2plunge_bearing(strike, dip)
    trend, ours_plunge = pole_of_plane(strike, dip)
    assert_allclose(ours_plunge, plunge[0], atol=1e-9)
    if ours_plunge < 89.999:
        assert_allclose((trend - bearing[0] + 180) % 360 - 180, 0.0, atol=1e-9)
    fig = plt.figure()
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", PendingDeprecationWarning)
            ax = fig.add_subplot(projection="equal_area_stereonet")
        lon, lat = stereonet_math.pole(strike, dip)
        px, py = ax.transProjection.transform(np.column_stack([lon, lat]))[0]
        edge = np.hypot(*ax.transProjection.transform(np.array([[np.pi / 2, 0.0]]))[0])
    finally:
        plt.close(fig)
    x, y = project_pole(trend, ours_plunge)
    assert_allclose([x, y], [px / edge, py / edge], atol=1e-9)


def test_projection_round_trip_and_equal_area():
    # equal area: the share of the disc within radius r equals the share of the lower
    # hemisphere within the matching cone, r^2 = 1 - cos(a) (analytic)
    t, p = np.meshgrid(np.arange(0, 360, 15.0), np.arange(0, 91, 10.0))
    x, y = project_pole(t, p)
    t2, p2, vec = unproject(x, y)
    assert_allclose(p2, p, atol=1e-9)
    mask = p < 89.999
    assert_allclose(np.mod(t2[mask] - t[mask] + 180, 360) - 180, 0.0, atol=1e-9)
    assert_allclose(np.linalg.norm(vec, axis=-1), 1.0)
    a = np.radians(90.0 - p)
    assert_allclose(x**2 + y**2, 1.0 - np.cos(a), atol=1e-12)
