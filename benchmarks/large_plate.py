"""A plate larger than a hemisphere: mesh quality and SHmax change on halving the element size.

The plate of tests/model/test_large_plate.py (the complement of a 30-degree cap: 93 % of the
sphere). Prints, for each pair of edge lengths, the change of SHmax azimuth where the fine
solution has s_hmax - s_hmin > 5 MPa (all such points, and those farther than 500 / 1000 km from
the boundary), plus mesh quality. Target (issue 12): < 0.5 degree on halving the element size.

Run: .venv/bin/python benchmarks/large_plate.py [EDGE_KM ...]   (default 200 100 50)
"""

from __future__ import annotations

import copy
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "model"))
from test_large_plate import large_plate_document  # noqa: E402  (the test's plate)

from stressmap.geo import sphere  # noqa: E402
from stressmap.model import build_model, predict_points  # noqa: E402
from stressmap.model.plate import parse_plate  # noqa: E402


def main(edges):
    doc = large_plate_document()
    plate = parse_plate(doc)
    rng = np.random.default_rng(0)
    xyz = sphere.normalize(rng.normal(size=(20000, 3)))
    lon, lat = sphere.xyz_to_lonlat(xyz)
    dist_km = 6371.0 * np.min(sphere.angle_between(xyz[:, None], np.asarray(plate.ring_xyz)[None]), axis=1)
    results = {}
    for edge in edges:
        d = copy.deepcopy(doc)
        d["mesh"] = {"edge_km": edge}
        t = time.perf_counter()
        model = build_model(d)
        m = model.summary["mesh"]
        print(f"edge {edge:6.1f} km: {m['nodes']:7d} nodes, min angle {m['min_angle_deg']:.1f} deg "
              f"(away from corners {m['min_angle_away_from_corners_deg']:.1f}), area error "
              f"{m['area_error']:.1e}, built in {time.perf_counter() - t:.1f} s", flush=True)
        results[edge] = predict_points(model, lon, lat)
    for a, b in zip(edges[:-1], edges[1:]):
        ca, cb = results[a], results[b]
        strong = ((cb["s_hmax_mpa"] - cb["s_hmin_mpa"]).values > 5.0) & cb["inside"].values & ca["inside"].values
        diff = np.abs((ca["shmax_azimuth_deg"].values - cb["shmax_azimuth_deg"].values + 90.0) % 180.0 - 90.0)
        for dmin in (0.0, 500.0, 1000.0):
            sel = strong & (dist_km > dmin)
            print(f"{a:g} -> {b:g} km, points > {dmin:4.0f} km from the boundary ({sel.sum():5d}): "
                  f"SHmax change max {diff[sel].max():.2f} deg, 99th pct {np.percentile(diff[sel], 99):.2f}, "
                  f"median {np.median(diff[sel]):.3f}")


if __name__ == "__main__":
    main([float(x) for x in sys.argv[1:]] or [200.0, 100.0, 50.0])
