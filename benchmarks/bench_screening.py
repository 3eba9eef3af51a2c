"""Screening throughput: planes x samples per second (prints figures; not a test).

Figures recorded in DEVELOPERS.md, "Performance figures" / "Screening".
"""

from __future__ import annotations

import resource
import time

import numpy as np

from stressmap.analyses import faults as fl
from stressmap.analyses import screening as sc
from stressmap.analyses.sitescreen import screen
from stressmap.formats.screening import parse_request_json as parse_request


def _best(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    rng = np.random.default_rng(0)
    for n, f in ((1, 100_000), (1000, 1000)):
        shmax, shmin = sc.frictional_equilibrium(72.0, 29.4, rng.uniform(0.5, 0.8, n), 1, 0.5)
        stress = sc.principal_tensor_ned(shmax, shmin, 72.0, rng.uniform(0, 180, n))
        strike, dip = rng.uniform(0, 360, f), rng.uniform(0, 90, f)
        t = _best(lambda: fl.fault_tendencies(stress[:, None], 29.4, strike, dip, 0.6))
        print(f"fault_tendencies: {n} samples x {f} planes: {t:.3f} s "
              f"({n * f / t / 1e6:.1f} M plane-samples/s)")

    # end to end: a 200-vertex trace set (199 segments) + 50 planes, 1000 samples
    lon = -15.0 + np.cumsum(rng.uniform(-0.01, 0.01, 200))
    lat = -20.0 + np.linspace(0, 0.5, 200)
    faults = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"dip_deg": 60, "dip_direction_deg": 90},
         "geometry": {"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()}}]}
    planes = [f"{s:.1f}/{d:.1f}" for s, d in zip(rng.uniform(0, 360, 50), rng.uniform(5, 90, 50))]
    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0,
                         "regime": "strike-slip", "planes": planes, "faults": faults,
                         "uncertainty": {"samples": 1000, "friction_range": [0.5, 0.8]}})
    t = _best(lambda: screen(req))
    print(f"screen (no model): 249 planes, 1000 samples: {t:.3f} s")
    planes = [f"{s:.1f}/{d:.1f}" for s, d in zip(rng.uniform(0, 360, 1000),
                                                  rng.uniform(5, 90, 1000))]
    req = parse_request({"site": [-15.0, -20.0], "depth_km": 3.0, "shmax_azimuth_deg": 40.0,
                         "regime": "strike-slip", "planes": planes,
                         "uncertainty": {"samples": 5000, "friction_range": [0.5, 0.8]}})
    t = _best(lambda: screen(req), repeat=1)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"screen (no model): 1000 planes, 5000 samples: {t:.3f} s; peak RSS of this script "
          f"{peak:.0f} MB")


if __name__ == "__main__":
    main()
