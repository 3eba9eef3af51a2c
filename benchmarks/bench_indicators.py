"""Throughput of the indicator pipeline: reading/converting, focal mechanisms, the observed grid
and the model-data comparison. Prints figures (no pass/fail); record them in DEVELOPERS.md.

Run: .venv/bin/python benchmarks/bench_indicators.py
"""

from __future__ import annotations

import copy
import io
import json
import time
from importlib import resources

import numpy as np
import pandas as pd


def timed(fn, *args, repeat=3, **kwargs):
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args, **kwargs)
        best = min(best, time.perf_counter() - t)
    return best, out


def synthetic_csv(n, rng):
    kinds = np.array(["breakout", "tensile_fracture", "geological", "focal_mechanism"], dtype=object)
    kind = kinds[rng.integers(0, kinds.size, n)]
    focal = kind == "focal_mechanism"
    frame = pd.DataFrame({
        "id": [f"X{i}" for i in range(n)],
        "lon": rng.uniform(-35, 10, n), "lat": rng.uniform(-35, -4, n), "type": kind,
        "azimuth_deg": np.where(focal, np.nan, rng.uniform(0, 180, n)),
        "strike_deg": np.where(focal, rng.uniform(0, 360, n), np.nan),
        "dip_deg": np.where(focal, rng.uniform(5, 90, n), np.nan),
        "rake_deg": np.where(focal, rng.uniform(-180, 180, n), np.nan),
        "sigma_deg": rng.uniform(10, 30, n),
    })
    buf = io.StringIO()
    frame.to_csv(buf, index=False)
    return buf.getvalue()


def main():
    from stressmap.geo import focal
    from stressmap.analyses.compare import compare
    from stressmap.formats.indicators import indicators_from_csv_text
    from stressmap.model import build_model
    from stressmap.analyses.observed import observed_grid

    rng = np.random.default_rng(0)
    n = 100_000
    text = synthetic_csv(n, rng)
    t_read, gdf = timed(indicators_from_csv_text, text, repeat=2)
    print(f"read + validate + convert {n} indicators (CSV text): {t_read:.2f} s "
          f"({1e6 * t_read / n:.1f} us per indicator)")

    m = 1_000_000
    s, d, r = rng.uniform(0, 360, m), rng.uniform(0, 90, m), rng.uniform(-180, 180, m)
    t_focal, _ = timed(focal.describe_mechanisms, s, d, r, repeat=1)
    print(f"describe {m} focal mechanisms (aux plane, axes, class, SHmax, span): {t_focal:.2f} s")

    sub = gdf.iloc[:20_000]
    t_grid, ds = timed(observed_grid, sub, bbox=(-35, -35, 10, -4), radius_km=300.0, spacing_km=30.0)
    print(f"observed grid: {len(sub)} indicators, {ds.sizes['lat']} x {ds.sizes['lon']} nodes, "
          f"radius 300 km: {t_grid:.2f} s")

    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json").read_text())
    t_build, model = timed(build_model, copy.deepcopy(doc), repeat=1)
    k = 10_000
    t_cmp, _ = timed(compare, model, gdf.iloc[:k])
    print(f"compare {k} indicators with the demo model (built in {t_build:.1f} s): {t_cmp:.2f} s")


if __name__ == "__main__":
    main()
