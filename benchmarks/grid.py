"""Grid and mask figures: THE lon/lat grid, the polygon masks and the vectorised coordinate check.

Run: ``.venv/bin/python benchmarks/grid.py`` (prints a table; never part of the test run).
Target: laying out and masking a grid of about 3.5 million nodes (near the library's largest,
MAX_GRID_POINTS = 4,000,000) in under 1 s each, well under the time a prediction on it takes;
parse_plate of the demo plate (every check through stressmap.validate) in tens of milliseconds.
"""

from __future__ import annotations

import importlib.resources
import json
import os
import time

import numpy as np
import shapely

from stressmap import validate
from stressmap.geo import grid
from stressmap.model.plate import parse_plate


def best(fn, repeats: int = 3) -> float:
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main() -> None:
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    bbox = (-40.0, -40.0, 20.0, 5.0)
    spacing = 3.0
    lon, lat = grid.regular_grid(bbox, spacing, max_nodes=4_000_000)
    n = lon.size * lat.size
    lon2, lat2 = np.meshgrid(lon, lat)
    ring = [(-30, -30), (10, -35), (15, 0), (-35, -5)]
    poly = shapely.Polygon(ring)
    doc = json.loads(importlib.resources.files("stressmap.data").joinpath("demo_plate.json")
                     .read_text(encoding="utf-8"))
    parse_plate(doc)  # the first call pays the imports
    rows = [
        ("regular_grid (axes only)", best(lambda: grid.regular_grid(bbox, spacing, 4_000_000))),
        ("polygon_mask, lon/lat edges", best(lambda: grid.polygon_mask(lon2, lat2, poly))),
        ("polygon_mask, great-circle edges",
         best(lambda: grid.polygon_mask(lon2, lat2, ring, arcs="great_circle"))),
        ("validate.lonlat_arrays", best(lambda: validate.lonlat_arrays(lon2, lat2, ("lon", "lat"), []))),
        ("parse_plate (demo plate, 16 segments)", best(lambda: parse_plate(doc), repeats=5)),
    ]
    print(f"{n:,} grid nodes ({lat.size} x {lon.size}); load average {load:.1f}")
    print(f"{'step':<40} {'best s':>8}")
    for name, seconds in rows:
        print(f"{name:<40} {seconds:8.3f}")


if __name__ == "__main__":
    main()
