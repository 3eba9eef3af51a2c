"""Specification of stressmap.fem.mesh: boundary-conforming triangulation of a plate on the sphere.

Exact areas come from pyproj's geodesic polygon area on a sphere (independent library); the
facet area converges to it at second order in the edge length (chords of a sphere, analytic);
mesh quality (minimum angle >= 20 degrees away from sharp corners) is the issue's requirement.
"""

import importlib.resources
import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from stressmap.geo import sphere
from stressmap.constants import EARTH_RADIUS_KM
from stressmap.errors import InputError
from stressmap.fem.mesh import Mesh, facet_areas_km2, mesh_plate, triangle_angles_deg
from stressmap.model.plate import parse_plate

pyproj = pytest.importorskip("pyproj")
GEOD = pyproj.Geod(a=6371e3, b=6371e3)


def ring_doc(ring, mesh=None, provinces=None, cuts=4):
    """A document whose ring (lon/lat list) is cut into ``cuts`` free segments."""
    ring = [list(map(float, v)) for v in ring]
    n = len(ring)
    at = np.linspace(0, n, min(cuts, n) + 1).astype(int)
    feats = [{"type": "Feature", "properties": {"kind": "free"},
              "geometry": {"type": "LineString", "coordinates": [ring[i % n] for i in range(a, b + 1)]}}
             for a, b in zip(at[:-1], at[1:])]
    doc = {"name": "test", "boundary": {"type": "FeatureCollection", "features": feats}}
    if mesh:
        doc["mesh"] = mesh
    if provinces:
        doc["provinces"] = {"type": "FeatureCollection", "features": provinces}
    return doc


def star(lon0, lat0, n=40, r0=10.0, amp=5.0, lobes=5):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = r0 + amp * np.cos(lobes * th)
    return np.column_stack([lon0 + r * np.cos(th), lat0 + r * np.sin(th)])


SHAPES = {
    "square": ([(0, 0), (30, 0), (30, 20), (0, 20)], {"edge_km": 60}),
    "non-convex U": ([(0, 0), (30, 0), (30, 20), (25, 20), (25, 5), (5, 5), (5, 20), (0, 20)],
                     {"edge_km": 40}),
    "antimeridian": ([(170, -10), (-170, -10), (-165, 5), (-175, 12), (175, 10)], {"edge_km": 50}),
    "star": (star(20, 0), {"edge_km": 50}),
    "polar cap": ([(0, 70), (90, 70), (180, 70), (-90, 70)], {"edge_km": 60}),
    "refined point": ([(0, 0), (30, 0), (30, 20), (0, 20)],
                      {"edge_km": 60, "refinement": [{"point": [10, 10], "edge_km": 3}]}),
    "refined polygon": ([(0, 0), (30, 0), (30, 20), (0, 20)],
                        {"edge_km": 60, "refinement": [{"polygon": [[5, 5], [12, 5], [12, 9], [5, 9]],
                                                        "edge_km": 15}]}),
    "sharp corner": ([(0, 0), (40, 2), (0, 4), (10, 2)], {"edge_km": 40}),
    "short arcs": (np.column_stack([
        (10 + 0.05 * np.sin(97 * np.linspace(0, 2 * np.pi, 600, endpoint=False)))
        * np.cos(np.linspace(0, 2 * np.pi, 600, endpoint=False)),
        (10 + 0.05 * np.sin(97 * np.linspace(0, 2 * np.pi, 600, endpoint=False)))
        * np.sin(np.linspace(0, 2 * np.pi, 600, endpoint=False))]), {"edge_km": 60}),
    "large": (np.column_stack([-60 + 60 * np.cos(np.linspace(0, 2 * np.pi, 24, endpoint=False)),
                               60 * np.sin(np.linspace(0, 2 * np.pi, 24, endpoint=False))]),
              {"edge_km": 150}),
}


@pytest.fixture(scope="module")
def demo_plate():
    doc = json.loads(importlib.resources.files("stressmap.data").joinpath("demo_plate.json").read_text())
    return parse_plate(doc)


@pytest.fixture(scope="module")
def demo_mesh(demo_plate):
    return mesh_plate(demo_plate)


@pytest.fixture(scope="module", params=sorted(SHAPES))
def shape(request):
    ring, mesh = SHAPES[request.param]
    plate = parse_plate(ring_doc(ring, mesh, cuts=6))
    return request.param, plate, mesh_plate(plate)


def check_conforming(plate, m: Mesh):
    """Topology and geometry every mesh must have (used by several tests)."""
    n = m.n_nodes
    # contract: dtypes, shapes, contiguity, read-only
    for name, dtype, shape in (("xyz", np.float64, (n, 3)), ("lonlat", np.float64, (n, 2)),
                               ("triangles", np.int64, (m.n_triangles, 3)),
                               ("element_province", np.int64, (m.n_triangles,)),
                               ("element_stiffness", np.float64, (m.n_triangles,))):
        a = getattr(m, name)
        assert a.dtype == dtype and a.shape == shape and a.flags.c_contiguous
        assert not a.flags.writeable
    assert m.boundary_edges.dtype == np.int64 and m.edge_segment.dtype == np.int64
    assert_allclose(np.linalg.norm(m.xyz, axis=1), 1.0, atol=1e-14)
    assert_allclose(sphere.lonlat_to_xyz(*m.lonlat.T), m.xyz, atol=1e-12)
    # every node used; triangles counter-clockwise seen from outside
    assert np.array_equal(np.unique(m.triangles), np.arange(n))
    assert np.all(facet_areas_km2(m.xyz, m.triangles) > 0)
    # edges: interior ones shared by two triangles, the others are exactly the boundary edges,
    # directed with the interior on the left (they run the same way as their triangle)
    directed = np.concatenate([m.triangles[:, [0, 1]], m.triangles[:, [1, 2]], m.triangles[:, [2, 0]]])
    key = directed[:, 0] * n + directed[:, 1]
    rev = directed[:, 1] * n + directed[:, 0]
    assert len(np.unique(key)) == len(key)  # no edge used twice in the same direction
    single = directed[~np.isin(key, rev)]
    assert {tuple(e) for e in single.tolist()} == {tuple(e) for e in m.boundary_edges.tolist()}
    # boundary edges chain into one ring in order
    assert np.array_equal(m.boundary_edges[1:, 0], m.boundary_edges[:-1, 1])
    assert m.boundary_edges[-1, 1] == m.boundary_edges[0, 0]
    # each boundary edge lies on a great-circle arc of its own segment
    ring = plate.ring_xyz
    a, b = ring, np.roll(ring, -1, axis=0)
    normal = sphere.normalize(np.cross(a, b))
    p, q = m.xyz[m.boundary_edges[:, 0]], m.xyz[m.boundary_edges[:, 1]]

    def on_arc(x):
        plane = np.abs(x @ normal.T) < 1e-10
        between = (sphere.angle_between(a[None], x[:, None]) + sphere.angle_between(x[:, None], b[None])
                   - sphere.angle_between(a, b)[None]) < 1e-10
        return plane & between

    own = plate.arc_segment[None, :] == m.edge_segment[:, None]
    assert np.all((on_arc(p) & on_arc(q) & own).any(axis=1))
    # every ring vertex is a node
    d = np.min(sphere.angle_between(ring[:, None], m.xyz[None, m.boundary_edges[:, 0]]), axis=1)
    assert np.all(d < 1e-14)


def test_demo_mesh_conforms(demo_plate, demo_mesh):
    check_conforming(demo_plate, demo_mesh)
    assert demo_mesh.stats["nodes"] == demo_mesh.n_nodes
    assert demo_mesh.stats["triangles"] == demo_mesh.n_triangles
    assert demo_mesh.stats["min_angle_deg"] >= 20.0


def test_shapes_conform_and_keep_quality(shape):
    name, plate, m = shape
    check_conforming(plate, m)
    # issue requirement: minimum angle >= 20 degrees away from sharp boundary corners
    assert m.stats["min_angle_away_from_corners_deg"] >= 20.0, name
    angles = triangle_angles_deg(m.xyz, m.triangles)
    assert_allclose(angles.sum(axis=1), 180.0, atol=1e-6)
    assert m.stats["min_angle_deg"] == pytest.approx(angles.min())


def test_area_matches_exact_spherical_polygon(shape):
    name, plate, m = shape
    ring = plate.ring_lonlat
    exact_m2, _ = GEOD.polygon_area_perimeter(ring[:, 0], ring[:, 1])
    assert_allclose(m.stats["exact_area_km2"], exact_m2 / 1e6, rtol=1e-9)
    # flat facets (chords) lose about (h/R)^2/12 of the area: a few 1e-5 at these sizes
    assert -2e-4 < m.stats["area_error"] < 0, name
    assert_allclose(m.stats["area_km2"], facet_areas_km2(m.xyz, m.triangles).sum(), rtol=1e-12)


def test_area_error_converges_at_second_order():
    doc = ring_doc([(0, 0), (30, 0), (30, 20), (0, 20)])
    plate = parse_plate(doc)
    errors = np.array([abs(mesh_plate(plate, edge_km=h).stats["area_error"]) for h in (160, 80, 40)])
    rates = np.log2(errors[:-1] / errors[1:])
    assert np.all(rates > 1.6), (errors, rates)


def test_antimeridian_mesh_has_no_wrapped_elements():
    plate = parse_plate(ring_doc(SHAPES["antimeridian"][0], {"edge_km": 50}))
    m = mesh_plate(plate)
    lon = m.lonlat[:, 0]
    assert (lon > 170).any() and (lon < -170).any()
    tri = m.triangles
    edge = np.linalg.norm(m.xyz[tri] - m.xyz[np.roll(tri, 1, axis=1)], axis=2) * EARTH_RADIUS_KM
    assert edge.max() < 2.5 * 50


def test_uniform_size_matches_target():
    m = mesh_plate(parse_plate(ring_doc([(0, 0), (30, 0), (30, 20), (0, 20)])), edge_km=50.0)
    assert 0.9 * 50 < m.stats["mean_edge_km"] < 1.05 * 50
    assert m.stats["edge_km"] == 50.0
    # equilateral triangles of side h cover sqrt(3)/4 h^2 each (analytic)
    expected = m.stats["exact_area_km2"] / (np.sqrt(3) / 4 * 50.0**2)
    assert 0.85 * expected < m.n_triangles < 1.25 * expected


def test_refinement_gives_smaller_elements_near_the_point():
    ring, mesh = SHAPES["refined point"]
    m = mesh_plate(parse_plate(ring_doc(ring, mesh)))
    cen = sphere.normalize(m.xyz[m.triangles].sum(axis=1))
    d = EARTH_RADIUS_KM * sphere.angle_between(cen, sphere.lonlat_to_xyz(10, 10))
    size = np.sqrt(facet_areas_km2(m.xyz, m.triangles) * 4 / np.sqrt(3))
    assert np.median(size[d < 15]) < 10.0
    assert np.median(size[d > 1000]) > 45.0
    # the size grows with distance (graded, no jump)
    near, mid = np.median(size[d < 30]), np.median(size[(d > 80) & (d < 120)])
    assert near < mid


def test_provinces_by_element_centroid():
    prov = [{"type": "Feature", "properties": {"lithosphere": "continental", "stiffness": 2.5},
             "geometry": {"type": "Polygon",
                          "coordinates": [[[-5, -5], [12, -5], [12, 25], [-5, 25], [-5, -5]]]}}]
    plate = parse_plate(ring_doc([(0, 0), (30, 0), (30, 20), (0, 20)], {"edge_km": 80}, prov))
    m = mesh_plate(plate)
    lon, _ = sphere.xyz_to_lonlat(sphere.normalize(m.xyz[m.triangles].sum(axis=1)))
    clearly_in, clearly_out = lon < 11.0, lon > 13.0
    assert np.all(m.element_province[clearly_in] == 0)
    assert np.all(m.element_province[clearly_out] == -1)
    assert np.all(m.element_stiffness[m.element_province == 0] == 2.5)
    assert np.all(m.element_stiffness[m.element_province == -1] == 1.0)


def test_demo_provinces_assigned(demo_plate, demo_mesh):
    got = set(np.unique(demo_mesh.element_province).tolist())
    assert {0, 1} <= got
    stiff = {p.stiffness for p in demo_plate.provinces} | {1.0}
    assert set(np.unique(demo_mesh.element_stiffness).tolist()) <= stiff


def test_edge_km_argument_overrides_document(demo_plate):
    m = mesh_plate(demo_plate, edge_km=150.0)
    assert m.stats["edge_km"] == 150.0 and m.n_nodes < 3000


@pytest.mark.parametrize("edge_km", [0.0, -5.0, float("nan")])
def test_bad_edge_km(demo_plate, edge_km):
    with pytest.raises(InputError, match="edge_km must be a positive number"):
        mesh_plate(demo_plate, edge_km=edge_km)


@pytest.mark.parametrize("seed", range(4))
def test_random_star_plates(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 30))
    th = np.sort(rng.uniform(0, 2 * np.pi, n))
    r = rng.uniform(4, 15, n)
    lon0, lat0 = rng.uniform(-180, 180), rng.uniform(-60, 60)
    c = sphere.lonlat_to_xyz(lon0, lat0)
    # place the star in the gnomonic plane of its centre (its arcs are straight there)
    xyz = sphere.gnomonic_inverse(np.tan(np.radians(r)) * np.cos(th), np.tan(np.radians(r)) * np.sin(th), c)
    ring = np.column_stack(sphere.xyz_to_lonlat(xyz))
    plate = parse_plate(ring_doc(ring, {"edge_km": 60}, cuts=min(n, 5)))
    m = mesh_plate(plate)
    check_conforming(plate, m)
    assert m.stats["min_angle_away_from_corners_deg"] >= 20.0
    assert abs(m.stats["area_error"]) < 2e-4
