"""Focal mechanisms: planes, P/T/B axes, Lund & Townend SHmax, Frohlich classes.

References used here:
* obspy (obspy.imaging.beachball: aux_plane, mt2axes, mt2plane) -- an independent library.
* A direct computation of the fault normal and slip vector by rotating a horizontal reference
  plane with scipy.spatial.transform.Rotation (Aki & Richards 1980 geometry, from memory: the
  plane dips to the right of the strike, rake measured from strike toward up-dip).
* Where obspy disagrees, a third computation: the moment tensor n d^T + d n^T, whose eigenvectors
  are the T (largest) and P (smallest) axes, and which is the same for both nodal planes.
* SHmax: a brute-force maximisation of the horizontal normal stress of the reconstructed tensor.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import minimize_scalar
from scipy.spatial.transform import Rotation

from stressmap.geo import focal

# (strike, dip, rake) table: pure and oblique slip, vertical and shallow planes (>= 30 rows).
MECHANISMS = [
    (0, 90, 0), (0, 90, 180), (37, 90, -180), (120, 90, 10), (250, 89, -5),   # strike-slip
    (0, 45, 90), (90, 30, 90), (215, 20, 90), (300, 10, 90), (10, 60, 90),    # reverse
    (0, 45, -90), (45, 60, -90), (170, 70, -90), (333, 35, -90),              # normal
    (30, 60, 45), (75, 50, -45), (200, 40, 135), (310, 80, -135),            # oblique
    (15, 25, 30), (95, 15, -150), (260, 5, 60), (130, 2, -20),               # shallow planes
    (60, 90, 90), (140, 90, -90), (0, 90, 45), (222, 90, -60),               # vertical planes, dip-slip
    (359, 88, 91), (1, 1, 1), (180, 75, 170), (275, 55, 5), (44, 33, -33),   # near-edge cases
    (123, 67, 89), (17, 85, -92), (350, 12, 178), (10, 0, 90), (0, 0, 0),
]
IDS = [f"{s}/{d}/{r}" for s, d, r in MECHANISMS]


def direct_vectors(strike, dip, rake):
    """Independent normal and slip (north, east, down): rotate a horizontal reference plane.

    Reference plane: horizontal, normal up (0, 0, -1), strike north, up-dip direction west (the
    side that stays up when the plane is tilted to dip east). Slip = cos(rake) strike + sin(rake)
    up-dip; tilt by the dip about north, then turn by the strike about the down axis.
    """
    lam = np.radians(rake)
    n0 = np.array([0.0, 0.0, -1.0])
    d0 = np.cos(lam) * np.array([1.0, 0.0, 0.0]) + np.sin(lam) * np.array([0.0, -1.0, 0.0])
    rot = Rotation.from_euler("xz", [dip, strike], degrees=True)  # extrinsic: dip first, then strike
    return rot.apply(n0), rot.apply(d0)


def double_couple(n, d):
    return np.einsum("...i,...j->...ij", n, d) + np.einsum("...i,...j->...ij", d, n)


def same_line(u, v, atol=1e-8):
    u = np.asarray(u) / np.linalg.norm(u)
    v = np.asarray(v) / np.linalg.norm(v)
    return abs(abs(float(np.dot(u, v))) - 1.0) < atol


@pytest.fixture(scope="module")
def beachball():
    """obspy.imaging.beachball, imported with obspy's own import-time DeprecationWarning (from its
    use of importlib.metadata) silenced; the run otherwise treats warnings as errors."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        import obspy.imaging.beachball as bb
    return bb


def ned_to_use(m):
    """Moment tensor (north, east, down) -> obspy's (up, south, east) components (mrr, mtt, mpp, mrt, mrp, mtp)."""
    return [m[2, 2], m[0, 0], m[1, 1], m[0, 2], -m[1, 2], -m[0, 1]]


def use_axis_to_ned(trend, plunge):
    return focal.vector_from_trend_plunge(trend, plunge)


@pytest.fixture(scope="module")
def table():
    s, d, r = (np.array(c, dtype=float) for c in zip(*MECHANISMS))
    return s, d, r


def test_table_is_large_enough():
    assert len(MECHANISMS) >= 30


def test_fault_vectors_match_direct_rotation(table):
    n, d = focal.fault_vectors(*table)
    for i, (s, dp, r) in enumerate(MECHANISMS):
        n_ref, d_ref = direct_vectors(s, dp, r)
        assert_allclose(n[i], n_ref, atol=1e-12)
        assert_allclose(d[i], d_ref, atol=1e-12)


def test_plane_from_vectors_round_trip_as_double_couple(table):
    n, d = focal.fault_vectors(*table)
    back = focal.fault_vectors(*focal.plane_from_vectors(n, d))
    # Same fault: same normal line and same double couple (the sign of the pair is free).
    assert_allclose(double_couple(*back), double_couple(n, d), atol=1e-12)
    assert_allclose(np.abs(np.sum(back[0] * n, axis=-1)), 1.0, atol=1e-12)


@pytest.mark.parametrize("mech", MECHANISMS, ids=IDS)
def test_auxiliary_plane_against_direct_and_obspy(mech, beachball):
    aux_plane = beachball.aux_plane
    s, dp, r = mech
    n, d = direct_vectors(s, dp, r)
    ours = focal.auxiliary_plane(s, dp, r)
    n2, d2 = direct_vectors(*[float(v) for v in ours])
    # Direct: the auxiliary plane's normal is the slip line, its slip the original normal line,
    # and it carries the same double couple.
    assert same_line(n2, d) and same_line(d2, n)
    assert_allclose(double_couple(n2, d2), double_couple(n, d), atol=1e-12)

    with np.errstate(all="ignore"):
        ref = aux_plane(float(s), float(dp), float(r))
    nr, dr = direct_vectors(*ref)
    assert same_line(nr, n2, atol=1e-8), "obspy and we disagree on the auxiliary plane itself"
    # obspy is wrong (opposite slip sense) for exactly horizontal given planes; see
    # test_obspy_aux_plane_sign_error_for_horizontal_fault for the third computation.
    sign = -1.0 if dp == 0 else 1.0
    assert_allclose(double_couple(nr, dr), sign * double_couple(n, d), atol=1e-8)


def test_obspy_aux_plane_sign_error_for_horizontal_fault(beachball):
    """obspy.aux_plane gets the slip sense of the (vertical) auxiliary plane wrong when the given
    plane is exactly horizontal: its rake sign comes from the vertical slip component, which is
    zero there, so it picks -90 instead of +90 and the returned plane carries the opposite double
    couple. The third computation (the moment tensor, identical for both nodal planes of a
    mechanism) shows that our answer is the right one. We do not bend our code to match."""
    aux_plane = beachball.aux_plane
    s, dp, r = 10.0, 0.0, 90.0
    m = double_couple(*direct_vectors(s, dp, r))              # third computation
    ours = double_couple(*direct_vectors(*[float(v) for v in focal.auxiliary_plane(s, dp, r)]))
    theirs = double_couple(*direct_vectors(*aux_plane(s, dp, r)))
    assert_allclose(ours, m, atol=1e-12)
    assert_allclose(theirs, -m, atol=1e-12)   # obspy: exactly the opposite mechanism


@pytest.mark.parametrize("mech", MECHANISMS, ids=IDS)
def test_axes_against_obspy_and_moment_tensor(mech, beachball):
    MomentTensor, mt2axes, mt2plane = beachball.MomentTensor, beachball.mt2axes, beachball.mt2plane
    n, d = direct_vectors(*mech)
    m = double_couple(n, d)
    p, t, b = (v for v in focal.principal_axes(*mech))
    # Third computation: eigenvectors of the moment tensor (numpy), largest = T, smallest = P.
    w, v = np.linalg.eigh(m)
    assert same_line(p, v[:, 0]) and same_line(t, v[:, 2]) and same_line(b, v[:, 1])
    # obspy (up, south, east) moment tensor -> axes as trend/plunge.
    t_ax, n_ax, p_ax = mt2axes(MomentTensor(ned_to_use(m), 0))
    for ours, theirs in ((p, p_ax), (t, t_ax), (b, n_ax)):
        assert same_line(ours, use_axis_to_ned(theirs.strike, theirs.dip), atol=1e-8)
    # Our trend/plunge of those axes describe the same lines.
    for ours in (p, t, b):
        tr, pl = focal.trend_plunge(ours)
        assert 0.0 <= pl <= 90.0 and 0.0 <= tr < 360.0
        assert same_line(focal.vector_from_trend_plunge(tr, pl), ours, atol=1e-12)
    # obspy's nodal plane from the moment tensor is one of our two planes -- except that obspy's
    # mt2plane can crash (TypeError inside its tdl helper) when one nodal plane is horizontal; there
    # the eigenvector computation above is the independent check.
    try:
        plane = mt2plane(MomentTensor(ned_to_use(m), 0))
    except TypeError:
        assert max(abs(n[2]), abs(d[2])) > 1.0 - 1e-12  # only ever for a horizontal nodal plane
        return
    n_ob, d_ob = direct_vectors(plane.strike, plane.dip, plane.rake)
    assert same_line(n_ob, n, atol=1e-6) or same_line(n_ob, d, atol=1e-6)


def test_planes_from_axes_recover_both_planes(table):
    p, t, b = focal.principal_axes(*table)
    (s1, d1, r1), (s2, d2, r2) = focal.planes_from_axes(p, t)
    n, d = focal.fault_vectors(*table)
    assert_allclose(double_couple(*focal.fault_vectors(s1, d1, r1)), double_couple(n, d), atol=1e-12)
    assert_allclose(double_couple(*focal.fault_vectors(s2, d2, r2)), double_couple(n, d), atol=1e-12)


# ---- SHmax from principal axes (Lund & Townend 2007) ----------------------------------------


def brute_force_shmax(s1, s2, s3, phi):
    """Independent: reconstruct sigma = 1 s1 s1^T + phi s2 s2^T + 0 s3 s3^T and maximise u^T sigma u
    over horizontal unit vectors u = (cos a, sin a, 0)."""
    sigma = np.outer(s1, s1) + phi * np.outer(s2, s2) + 0.0 * np.outer(s3, s3)

    def neg(a_deg):
        a = np.radians(a_deg)
        u = np.array([np.cos(a), np.sin(a), 0.0])
        return -u @ sigma @ u

    grid = np.arange(0.0, 180.0, 0.5)
    a0 = grid[np.argmin([neg(a) for a in grid])]
    res = minimize_scalar(neg, bounds=(a0 - 1.0, a0 + 1.0), method="bounded",
                          options={"xatol": 1e-10})
    values = [neg(a) for a in grid]
    anisotropy = max(values) - min(values)
    return np.mod(res.x, 180.0), anisotropy


def test_shmax_random_triads_against_brute_force():
    rng = np.random.default_rng(20071)
    rots = Rotation.random(60, random_state=rng).as_matrix()
    phis = rng.uniform(0.0, 1.0, 60)
    s1, s2, s3 = rots[:, :, 0], rots[:, :, 1], rots[:, :, 2]
    ours = focal.shmax_from_axes(s1, s2, phis)
    checked = 0
    for i in range(60):
        ref, aniso = brute_force_shmax(s1[i], s2[i], s3[i], phis[i])
        if aniso < 1e-3:
            continue  # nearly isotropic horizontally: the direction is ill-conditioned
        diff = np.mod(ours[i] - ref + 90.0, 180.0) - 90.0
        assert abs(diff) < 1e-4, (i, ours[i], ref)
        checked += 1
    assert checked >= 50


@pytest.mark.parametrize(
    "s1, s2, phi",
    [
        ([0, 0, 1], [1, 0, 0], 0.0),                               # s1 vertical, sigma2 = sigma3
        ([1, 0, 0], [0, 1, 0], 1.0),                               # s3 vertical, sigma1 = sigma2
        ([np.sqrt(0.5), 0, np.sqrt(0.5)], [0, 1, 0], 0.5),         # P and T at 45 degrees
        ([0, np.sqrt(0.25), np.sqrt(0.75)], [1, 0, 0], 0.25),      # tan^2(60) = 3 = (1 - phi)/phi
    ],
)
def test_shmax_degenerate_cases_are_undefined(s1, s2, phi):
    s1 = np.asarray(s1, float)
    s2 = np.asarray(s2, float)
    _, aniso = brute_force_shmax(s1, s2, np.cross(s1, s2), phi)
    assert aniso < 1e-12  # the brute force agrees the horizontal stress is isotropic
    assert np.isnan(focal.shmax_from_axes(s1, s2, phi))


def test_shmax_simple_regimes_common_practice(table):
    """Common practice: for strike-slip mechanisms SHmax ~ P trend; for reverse with vertical T,
    SHmax = P trend; for normal with vertical P, SHmax = B trend."""
    out = focal.describe_mechanisms([0.0, 0.0, 30.0], [90.0, 45.0, 45.0], [0.0, 90.0, -90.0])
    assert_allclose(out["shmax_azimuth_deg"][0], np.mod(out["p_trend_deg"][0], 180.0), atol=1e-9)
    assert_allclose(out["shmax_azimuth_deg"][1], np.mod(out["p_trend_deg"][1], 180.0), atol=1e-9)
    assert_allclose(out["shmax_azimuth_deg"][2], np.mod(out["b_trend_deg"][2], 180.0), atol=1e-9)
    assert list(out["mechanism_class"]) == ["strike-slip", "reverse", "normal"]


def test_vertical_dip_slip_has_no_shmax_at_half_shape_ratio():
    # Lund & Townend (2007): pure dip-slip on a vertical plane puts P and T at 45 degrees.
    out = focal.describe_mechanisms(20.0, 90.0, 90.0)
    assert np.isnan(out["shmax_azimuth_deg"])
    assert out["mechanism_class"] == "oblique"


@pytest.mark.parametrize(
    "plunges, expected",
    [
        ((0.0, 29.0, 61.0), "strike-slip"),   # B plunge > 60
        ((0.0, 31.0, 59.0), "oblique"),
        ((39.0, 51.0, 0.0), "reverse"),       # T plunge > 50
        ((41.0, 49.0, 0.0), "oblique"),
        ((61.0, 29.0, 0.0), "normal"),        # P plunge > 60
        ((59.0, 31.0, 0.0), "oblique"),
    ],
)
def test_frohlich_thresholds(plunges, expected):
    """Frohlich (1992) thresholds, from memory; the axes are built orthogonal with these plunges."""
    p_pl, t_pl, b_pl = plunges
    # An orthogonal triad in the vertical plane of azimuth 0 (P, T) with B horizontal, or a B-plunging one.
    if b_pl == 0.0:
        p = focal.vector_from_trend_plunge(0.0, p_pl)
        t = focal.vector_from_trend_plunge(180.0, t_pl)
        b = np.cross(p, t)
    else:
        b = focal.vector_from_trend_plunge(0.0, b_pl)
        p = focal.vector_from_trend_plunge(90.0, 0.0)
        t = np.cross(b, p)
    assert_allclose([p @ t, p @ b, t @ b], 0.0, atol=1e-12)
    pp, tp, bp = (focal.trend_plunge(v)[1] for v in (p, t, b))
    assert focal.frohlich_class(pp, tp, bp) == expected
    # And the same class when the axes go through nodal planes and back.
    (s, d, r), _ = focal.planes_from_axes(p, t)
    assert focal.describe_mechanisms(s, d, r)["mechanism_class"] == expected


def test_describe_is_vectorised_and_handles_nan():
    out = focal.describe_mechanisms([0.0, np.nan], [90.0, 45.0], [0.0, 90.0])
    assert out["mechanism_class"].tolist() == ["strike-slip", ""]
    assert np.isnan(out["shmax_azimuth_deg"][1])


def test_shmax_span_equals_dense_sampling_of_the_shape_ratio():
    """The end-point formula for the span against brute force over 201 shape ratios."""
    rots = Rotation.random(300, random_state=np.random.default_rng(8)).as_matrix()
    s1, s2 = rots[:, :, 0], rots[:, :, 1]
    span = focal.shmax_span_deg(s1, s2)
    phis = np.linspace(0.0, 1.0, 201)
    az = focal.shmax_from_axes(s1[:, None, :], s2[:, None, :], phis)
    ref = focal.shmax_from_axes(s1, s2, 0.5)[:, None]
    dense = np.where(np.isnan(az), -1.0, np.abs(np.mod(az - ref + 90.0, 180.0) - 90.0)).max(axis=1)
    ok = np.isfinite(span)
    assert ok.sum() > 290
    assert_allclose(span[ok], dense[ok], atol=1e-9)
