"""Well screening speed: the mud-weight window chart and sampled depth profiles.

Targets: a full window chart (every 5 degrees of azimuth and inclination: 72 x 19 wells) < 1 s;
a depth profile with 1000 samples per depth at 100 depths < 2 s. Prints the best of 3 runs.
Run: .venv/bin/python benchmarks/wells.py
"""

from __future__ import annotations

import time

import numpy as np

from stressmap.analyses.depth_profile import depth_grid, stress_profile
from stressmap.analyses.screening import principal_tensor_ned
from stressmap.analyses.wells import parse_well_request, run_window
from stressmap.analyses.wellbore import mud_window, rock_strength


def best(fn, runs=3):
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main():
    stress = principal_tensor_ned(90.0, 60.0, 70.0, 30.0)
    az, inc = np.meshgrid(np.arange(0, 360, 5.0), np.arange(0, 91, 5.0))
    rock = rock_strength(60.0)
    t_window = best(lambda: mud_window(stress, 30.0, 60.0, az, inc, rock))
    req = parse_well_request({"site": [5, 50], "depth_km": 3, "regime": "strike-slip",
                              "shmax_azimuth_deg": 30, "rock": {"ucs_mpa": 60}})
    t_request = best(lambda: run_window(req))
    rng = np.random.default_rng(0)
    samples = {"friction": rng.uniform(0.5, 0.8, 1000),
               "pore_gradient_mpa_km": rng.uniform(9.8, 12.0, 1000),
               "density_kg_m3": rng.uniform(2300, 2600, 1000)}
    z = depth_grid(5.0, count=100)
    t_profile = best(lambda: stress_profile(z, regime_code=1, shape_ratio=0.5,
                                            samples=samples))
    print(f"window chart, {az.size} wells x 360 angles (core): {t_window:.3f} s (target < 1 s)")
    print(f"window chart request incl. site stress (library): {t_request:.3f} s")
    print(f"depth profile, 1000 samples x 100 depths: {t_profile:.3f} s (target < 2 s)")


if __name__ == "__main__":
    main()
