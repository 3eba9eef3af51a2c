"""Generate ``demo_network.geojson`` and ``demo_network.toml``: the FICTIONAL demo planet Orrin.

Orrin and its plates are invented for demonstrations and tests only; they describe no real place
and must not be used for any real-world decision. The plates are cells of a spherical Voronoi
diagram of seeded random points (a group of neighbouring cells merged into Pelagia, a plate
larger than a hemisphere); each plate gets a random rotation, and each boundary line's kind follows the
relative motion across it at its midpoint: opening -> ridge, closing -> subduction (the oceanic or
the older plate sinks) or collision (two continental plates), mostly sliding -> transform with
its sense.

Run from the repository root (seeded, so the output is reproducible)::

    .venv/bin/python -m stressmap.data.make_demo_network
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from stressmap.geo import sphere

__all__ = ["make_demo_network", "SEED", "NAMES"]

SEED = 20261202
#: Invented plate names: (name, lithosphere of its leading edges).
NAMES = [("Pelagia", "oceanic"), ("Aldavar", "continental"), ("Brennic", "oceanic"),
         ("Caldra", "continental"), ("Dunmere", "oceanic"), ("Estrel", "continental"),
         ("Fallowin", "oceanic"), ("Gorsk", "continental"), ("Halvern", "oceanic"),
         ("Isket", "oceanic"), ("Jorune", "continental"), ("Kestrine", "oceanic"),
         ("Lumeth", "continental"), ("Morvay", "oceanic")]
_N_SEEDS = 20  # cells; a connected group of them, over half the sphere, becomes Pelagia
_PELAGIA_SHARE = 0.55
_DESCRIPTION = ("FICTIONAL planet Orrin, invented for demonstrations and tests only. Its plates, "
                "boundary lines, ages and parameters are made up; they describe no real place "
                "and must not be used for any real-world decision.")


def _voronoi(rng):
    from scipy.spatial import SphericalVoronoi

    pts = sphere.normalize(rng.normal(size=(_N_SEEDS, 3)))
    sv = SphericalVoronoi(pts, radius=1.0)
    sv.sort_vertices_of_regions()
    return pts, sv


def _cell_to_plate(pts, sv) -> np.ndarray:
    """Cells -> plates: cell 0 and its nearest neighbouring cells, over 55 % of the sphere,
    make Pelagia."""
    edges = {}
    for c, region in enumerate(sv.regions):
        for a, b in zip(region, region[1:] + region[:1]):
            edges.setdefault((min(a, b), max(a, b)), []).append(c)
    neighbours = {c: set() for c in range(len(pts))}
    for cells in edges.values():
        if len(cells) == 2:
            neighbours[cells[0]].add(cells[1])
            neighbours[cells[1]].add(cells[0])
    share = sv.calculate_areas() / (4.0 * np.pi)
    group = [0]
    while share[group].sum() < _PELAGIA_SHARE:  # grow by the nearest neighbour: stays connected
        cand = sorted({n for c in group for n in neighbours[c]} - set(group),
                      key=lambda n: -float(pts[n] @ pts[0]))
        group.append(cand[0])
    plate = np.full(len(pts), -1)
    plate[group] = 0
    rest = [c for c in range(len(pts)) if c not in group]
    plate[rest] = np.arange(1, len(rest) + 1)
    return plate, edges


def _line_coords(a, b, rng) -> list:
    """A gently wavy line from a to b: points every ~4 degrees, inner ones nudged sideways."""
    n = max(2, int(np.ceil(np.degrees(sphere.angle_between(a, b)) / 4.0)))
    t = np.linspace(0.0, 1.0, n + 1)
    p = sphere.slerp(a, b, t)
    side = sphere.normalize(np.cross(a, b))
    nudge = np.radians(0.6) * rng.uniform(-1, 1, size=n + 1)
    nudge[[0, -1]] = 0.0
    p = sphere.normalize(p + nudge[:, None] * side)
    lon, lat = sphere.xyz_to_lonlat(p)
    return np.round(np.column_stack([lon, lat]), 4).tolist()


def _kind(props: dict, v_rel, t, n, lith_left, lith_right, age_left, age_right, rng) -> dict:
    """Kind and parameters from the right plate's motion relative to the left one."""
    closing, sliding = float(v_rel @ n), float(v_rel @ t)
    if abs(sliding) > 2.0 * abs(closing):
        props.update(kind="transform", sense="dextral" if sliding < 0 else "sinistral")
    elif closing < 0:
        props.update(kind="ridge", age_myr=float(rng.integers(60, 120)))
    elif lith_left == lith_right == "continental":
        props.update(kind="collision")
    else:
        if lith_left != lith_right:
            sinks = "left" if lith_left == "oceanic" else "right"
        else:
            sinks = "left" if age_left > age_right else "right"
        props.update(kind="subduction", sinks=sinks, slab_age_myr=float(rng.integers(30, 120)),
                     slab_depth_km=float(rng.choice([410.0, 660.0])),
                     pull_fraction=round(float(rng.uniform(0.05, 0.2)), 2))
    return props


def make_demo_network(seed: int = SEED) -> tuple[dict, str]:
    """The demo network lines (GeoJSON dict) and parameter file (TOML text)."""
    rng = np.random.default_rng(seed)
    pts, sv = _voronoi(rng)
    plate, edges = _cell_to_plate(pts, sv)
    plates = NAMES[: plate.max() + 1]
    omega = rng.normal(size=(len(plates), 3)) * 1.0  # rotation vectors (deg/Myr, made up)
    age = rng.uniform(20, 150, size=len(plates))
    features = []
    for (va, vb), cells in sorted(edges.items()):
        if len(cells) != 2 or plate[cells[0]] == plate[cells[1]]:
            continue
        a, b = sv.vertices[va], sv.vertices[vb]
        mid = sphere.normalize(a + b)
        t = sphere.normalize(b - a - ((b - a) @ mid) * mid)
        n = np.cross(mid, t)  # to the left of the line
        left_cell = cells[0] if float(pts[cells[0]] @ n) > float(pts[cells[1]] @ n) else cells[1]
        right_cell = cells[1] if left_cell == cells[0] else cells[0]
        pl, pr = plate[left_cell], plate[right_cell]
        v_rel = np.cross(omega[pr] - omega[pl], mid)
        props = {"left": plates[pl][0], "right": plates[pr][0]}
        props = _kind(props, v_rel, t, n, plates[pl][1], plates[pr][1], age[pl], age[pr], rng)
        features.append({"type": "Feature", "properties": props,
                         "geometry": {"type": "LineString", "coordinates": _line_coords(a, b, rng)}})
    lines = {"type": "FeatureCollection", "name": "Orrin (fictional demo planet)",
             "features": features}
    toml = "\n".join([
        'name = "Orrin (fictional demo planet)"',
        f'description = "{_DESCRIPTION}"',
        "",
        "[defaults.mesh]",
        "edge_km = 400.0  # coarse: the demo builds in seconds; use 50-100 km for real work",
        "",
        "[defaults.sheet]",
        "thickness_km = 100.0",
        "",
        "[plates.Pelagia.mesh]",
        "edge_km = 500.0  # the largest plate (more than a hemisphere)",
        "",
    ])
    return lines, toml


def main() -> None:  # pragma: no cover - run by hand to refresh the shipped files
    lines, toml = make_demo_network()
    here = Path(__file__).resolve().parent
    (here / "demo_network.geojson").write_text(json.dumps(lines, indent=1) + "\n", encoding="utf-8")
    (here / "demo_network.toml").write_text(toml, encoding="utf-8")
    print(f"wrote {len(lines['features'])} lines")


if __name__ == "__main__":  # pragma: no cover
    main()
