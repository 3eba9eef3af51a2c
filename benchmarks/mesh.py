"""Mesher figures: time, size and quality for the demo plate at several edge lengths.

Run: ``.venv/bin/python benchmarks/mesh.py`` (prints a table; never part of the test run).
Targets (issue 3, mesher part): a ~1.5e7 km^2 plate at 25 km edges well under 2 s, at 10 km
(~175k nodes) in a few seconds; minimum angle >= 20 degrees away from sharp corners.
"""

from __future__ import annotations

import importlib.resources
import json
import os
import time

from stressmap.fem.mesh import mesh_plate
from stressmap.model.plate import parse_plate


def main(edges=(50.0, 25.0, 10.0), repeats: int = 2) -> None:
    doc = json.loads(importlib.resources.files("stressmap.data").joinpath("demo_plate.json").read_text())
    plate = parse_plate(doc)  # first call pays the imports
    t = time.perf_counter()
    plate = parse_plate(doc)
    t_parse = time.perf_counter() - t
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"demo plate {plate.area_km2:.4g} km^2, {len(plate.segments)} segments; "
          f"parse + validate {t_parse * 1e3:.1f} ms; load average {load:.1f}")
    print(f"{'edge_km':>8} {'nodes':>8} {'triangles':>10} {'best s':>8} {'min angle':>10} "
          f"{'away corners':>13} {'area error':>11}")
    for edge in edges:
        best = float("inf")
        for _ in range(repeats):
            t = time.perf_counter()
            m = mesh_plate(plate, edge_km=edge)
            best = min(best, time.perf_counter() - t)
        s = m.stats
        print(f"{edge:8.0f} {s['nodes']:8d} {s['triangles']:10d} {best:8.2f} "
              f"{s['min_angle_deg']:10.1f} {s['min_angle_away_from_corners_deg']:13.1f} "
              f"{s['area_error']:11.2e}")


if __name__ == "__main__":
    main()
