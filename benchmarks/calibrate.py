"""Benchmark: calibration over 1,000 indicators with 6 load groups and 200 bootstrap resamples.

Target (issue 6): under 30 s on 2 cores. The cost does not depend on where the unit fields come
from, so they are random (G, N, 3) arrays; indicators are generated from known weights plus
10-degree noise. Prints the wall time of the full default calibration (8 starts, 200 bootstrap
resamples, 100 random-azimuth calibrations for the significance) and of its parts, and the ratio
to the target. Run: ``.venv/bin/python benchmarks/calibrate.py``.
"""

from __future__ import annotations

import os
import time

import numpy as np

from stressmap.analyses.calibrate import calibrate_arrays, indicator_kappa
from stressmap.geo.tensor import shmax_azimuth_deg

TARGET_S = 30.0


def main() -> None:
    g, n = 6, 1000
    rng = np.random.default_rng(0)
    unit = rng.normal(size=(g, n, 3))
    truth = np.array([1.0, 0.5, 2.0, 0.8, 1.5, 0.3])
    s = np.einsum("g,gnc->nc", truth, unit)
    az = np.mod(shmax_azimuth_deg(s[:, 0], s[:, 1], s[:, 2]) + rng.normal(0, 10.0, n), 180.0)
    kappa = indicator_kappa(np.full(n, 10.0))
    print(f"calibration benchmark: {n} indicators, {g} load groups, {os.cpu_count()} CPUs, "
          f"load average {os.getloadavg()[0]:.1f}")
    parts = {}
    for label, kw in (("fit only (8 starts)", dict(n_bootstrap=0, n_random=0)),
                      ("fit + 200 bootstrap", dict(n_bootstrap=200, n_random=0)),
                      ("full default (+100 random)", dict(n_bootstrap=200, n_random=100))):
        t0, c0 = time.perf_counter(), time.process_time()
        res = calibrate_arrays(unit, az, kappa, reference="g0", seed=1, **kw)
        parts[label] = time.perf_counter() - t0
        print(f"  {label:<28} {parts[label]:7.2f} s wall, {time.process_time() - c0:7.2f} s CPU")
    err = np.abs(res.weights - truth).max()
    cover = np.all((res.weights_ci[:, 0] <= truth) & (truth <= res.weights_ci[:, 1]))
    print(f"  recovered weights within {err:.3f} of the truth; truth inside every 95% interval: "
          f"{bool(cover)}; misfit {res.misfit_before_deg:.1f} -> {res.misfit_after_deg:.1f} deg")
    total = parts["full default (+100 random)"]
    print(f"  target {TARGET_S:.0f} s: ratio {total / TARGET_S:.2f} "
          f"({'meets' if total < TARGET_S else 'MISSES'} the target)")


if __name__ == "__main__":
    main()
