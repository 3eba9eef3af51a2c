"""Serialising results for GIS clients (prints figures; not a test).

Times, on the fictional demo plate (coarse 100 km mesh): a 100 000-point prediction serialised
as GeoJSON (rounded, named), CSV (+ .csvt) and CF netCDF; a 25 km grid as CF netCDF; building
the OGC API - Features field collection at 100 km and one bbox query over it. Point prediction
itself is untouched by these serialisers (see point_latency.py for its latency).
"""

from __future__ import annotations

import copy
import json
import time
from importlib import resources


def _timed(fn, *args, repeat: int = 3, **kwargs):
    best = float("inf")
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args, **kwargs)
        best = min(best, time.perf_counter() - t)
    return out, best


def main() -> None:
    import numpy as np

    from stressmap.formats import export
    from stressmap.formats.features import feature_bboxes, field_features, select
    from stressmap.model import build_model, predict_grid, predict_points

    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json").read_text("utf-8"))
    doc = copy.deepcopy(doc)
    doc["mesh"] = {"edge_km": 100.0}
    model = build_model(doc)
    rng = np.random.default_rng(0)
    n = 100_000
    lon, lat = rng.uniform(-30, 5, n), rng.uniform(-35, -5, n)
    ds, t_pred = _timed(predict_points, model, lon, lat, repeat=1)
    print(f"predict_points, {n} points: {t_pred:.2f} s")
    fc, t = _timed(export.points_geojson, ds, repeat=1)
    size = len(json.dumps(fc, allow_nan=False)) / 1e6
    print(f"GeoJSON, {n} points: {t:.2f} s, {size:.1f} MB ({size * 1e3 / n:.2f} kB/point)")
    text, t = _timed(export.points_csv, ds, repeat=1)
    print(f"CSV, {n} points: {t:.2f} s, {len(text) / 1e6:.1f} MB; .csvt {export.points_csvt(ds)!r}")
    data, t = _timed(export.netcdf_bytes, ds, repeat=1)
    print(f"CF netCDF, {n} points: {t:.2f} s, {len(data) / 1e6:.1f} MB")
    grid = predict_grid(model, (-36, -36, 10, -4), 25.0)
    data, t = _timed(export.netcdf_bytes, grid)
    print(f"CF netCDF, 25 km grid {grid.sizes['lat']} x {grid.sizes['lon']}: {1e3 * t:.0f} ms, "
          f"{len(data) / 1e6:.1f} MB")
    fc, t = _timed(export.grid_geojson, grid)
    size = len(json.dumps(fc, allow_nan=False)) / 1e6
    print(f"GeoJSON, 25 km grid ({len(fc['features'])} nodes inside): {1e3 * t:.0f} ms, {size:.1f} MB")

    def collection():
        g = predict_grid(model, (-36, -37, 10, -3), 100.0)
        feats = field_features(g)
        return feats, feature_bboxes(feats)

    (feats, boxes), t = _timed(collection)
    print(f"OGC API field collection at 100 km ({len(feats)} features): built in {1e3 * t:.0f} ms")
    hits, t = _timed(select, boxes, (-20, -25, -5, -10), repeat=20)
    print(f"bbox query over it: {1e6 * t:.0f} us ({hits.size} features)")


if __name__ == "__main__":
    main()
