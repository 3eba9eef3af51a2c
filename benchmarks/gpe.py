"""Benchmark of the GPE load group (issue 13, item 6). Prints figures; never part of the tests.

1. **Build cost**: the fictional demo plate scaled to ~1.5e7 km^2 with 25 km edges, built with and
   without the GPE group (the fictional demo elevation grid, scaled with the plate), each in its
   own process; ``--repeat`` interleaved pairs (the machine may be shared, so
   best and median ratios are both printed) with of the build times (target < 1.5) with the
   per-stage timings of both.
2. **Reading and sampling a 5-arc-minute grid** over the same plate: a CF netCDF elevation grid
   (float32) written to a temporary folder, once regional (the plate's box plus 5 degrees) and once
   global (4320 x 2160), read with ``stressmap.io.grids.read_grid`` subset to the plate and
   sampled (box pre-average over the mesh edge, then bilinear) at the mesh nodes; wall time and
   peak memory of the process (targets < 2 s and < 1 GiB).

Run: ``.venv/bin/python benchmarks/gpe.py`` (``--repeat 1`` for a quick run).
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

TARGETS = {"build_ratio": 1.5, "grid_s": 2.0, "grid_gib": 1.0}


def peak_rss_gib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2


def _scaled_plate_and_elevation(edge_km=25.0):
    from solver import scaled_demo

    from stressmap.data.demo_elevation import demo_elevation, demo_gpe_document
    from stressmap.geo.raster import Raster

    doc = scaled_demo(edge_km)
    base = demo_gpe_document("elevation")
    s = float(doc["name"].split("x")[-1].rstrip(")"))
    coords = np.concatenate([np.asarray(f["geometry"]["coordinates"], float)
                             for f in base["boundary"]["features"]])
    lon0, lat0 = coords.mean(axis=0)
    r = demo_elevation()
    scaled = Raster(lon0 + s * (r.lon - lon0), lat0 + s * (r.lat - lat0), r.values, r.name, r.units)
    return doc, scaled


def case_build(with_gpe: int) -> dict:
    from stressmap.model import build_model

    doc, elevation = _scaled_plate_and_elevation()
    grids = None
    if with_gpe:
        doc["gpe"] = {"elevation_grid": "elevation"}
        grids = {"elevation": elevation}
    t0, c0 = time.perf_counter(), time.process_time()
    built = build_model(doc, grids=grids)
    return {"build_s": time.perf_counter() - t0, "cpu_s": time.process_time() - c0,
            "groups": len(built.groups),
            "dofs": built.summary["dofs"], "timings": built.summary["timings"],
            "peak_gib": peak_rss_gib()}


def case_grid(kind: str, folder: str) -> dict:
    import xarray as xr

    from stressmap.fem.mesh import mesh_plate
    from stressmap.geo.raster import sample_raster
    from stressmap.io.grids import document_bbox, read_grid
    from stressmap.model.plate import parse_plate

    doc, _ = _scaled_plate_and_elevation()
    nodes = mesh_plate(parse_plate(doc)).lonlat
    w, s, e, n = document_bbox(doc)
    step = 1.0 / 12.0  # 5 arc minutes
    if kind == "global":
        lon = np.arange(-180.0 + step / 2, 180.0, step)
        lat = np.arange(-90.0 + step / 2, 90.0, step)
    else:
        lon = np.arange(w - 5.0, e + 5.0, step)
        lat = np.arange(s - 5.0, n + 5.0, step)
    rng = np.random.default_rng(0)
    values = (500.0 + 300.0 * rng.standard_normal((lat.size, lon.size))).astype("float32")
    path = Path(folder) / f"elev_{kind}.nc"
    xr.Dataset({"z": (("lat", "lon"), values, {"units": "m"})},
               coords={"lat": ("lat", lat, {"units": "degrees_north"}),
                       "lon": ("lon", lon, {"units": "degrees_east"})}).to_netcdf(path)
    del values
    rss_before = peak_rss_gib()
    t0 = time.perf_counter()
    raster = read_grid(path, "elevation", bbox=(w, s, e, n))
    t_read = time.perf_counter() - t0
    got, ok = sample_raster(raster, nodes[:, 0], nodes[:, 1], smooth_km=25.0)
    t_all = time.perf_counter() - t0
    return {"cells_file": int(lon.size * lat.size), "cells_read": int(raster.values.size),
            "nodes": int(nodes.shape[0]), "inside": int(ok.sum()), "read_s": t_read,
            "total_s": t_all, "peak_gib": peak_rss_gib(), "peak_before_gib": rss_before,
            "file_mib": path.stat().st_size / 2**20}


def run_case(*args) -> dict:
    proc = subprocess.run([sys.executable, __file__, "--case", *map(str, args)],
                          capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise RuntimeError(f"case {args} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _stages(t: dict) -> str:
    return ", ".join(f"{k[:-2]} {v:.2f}" for k, v in t.items() if k != "total_s")


def main(repeat: int = 2) -> None:
    print("stressmap GPE benchmark (wall-clock seconds; peak = max RSS of the case's process)")
    print()
    print("1. build of the ~1.5e7 km^2 demo plate (25 km edges) without / with the GPE group")
    pairs = [(run_case("build", 0), run_case("build", 1)) for _ in range(repeat)]  # interleaved
    runs = {0: [a for a, _ in pairs], 1: [b for _, b in pairs]}
    best = {flag: min(r, key=lambda x: x["build_s"]) for flag, r in runs.items()}
    for flag, label in ((0, "without"), (1, "with   ")):
        b = best[flag]
        print(f"   {label}: {b['build_s']:.2f} s, {b['groups']} groups, {b['dofs']} DOF, "
              f"peak {b['peak_gib']:.2f} GiB; stages: {_stages(b['timings'])}")
    ratio = best[1]["build_s"] / best[0]["build_s"]
    pair_ratio = float(np.median([b["build_s"] / a["build_s"] for a, b in pairs]))
    extra = float(np.median([b["timings"]["loads_s"] - a["timings"]["loads_s"] for a, b in pairs]))
    cpu_ratio = float(np.median([b["cpu_s"] / a["cpu_s"] for a, b in pairs]))
    print(f"   ratio with/without: best {ratio:.2f}, median of {repeat} interleaved pairs "
          f"{pair_ratio:.2f}, CPU time {cpu_ratio:.2f} (target < {TARGETS['build_ratio']}); "
          f"the GPE load itself adds {extra:.2f} s to the loads stage (median)")
    print()
    print("2. read a 5-arc-minute netCDF grid, subset to the plate, sample at the mesh nodes")
    with tempfile.TemporaryDirectory() as folder:
        for kind in ("regional", "global"):
            g = run_case("grid", kind, folder)
            print(f"   {kind:8}: file {g['cells_file']:,} cells ({g['file_mib']:.0f} MiB), read "
                  f"{g['cells_read']:,}; {g['nodes']:,} nodes ({g['inside']:,} sampled): read "
                  f"{g['read_s']:.2f} s, read + sample {g['total_s']:.2f} s, peak "
                  f"{g['peak_gib']:.2f} GiB (before reading {g['peak_before_gib']:.2f})")
    print(f"   targets: < {TARGETS['grid_s']} s and < {TARGETS['grid_gib']} GiB")


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--case":
        name, args = sys.argv[2], sys.argv[3:]
        if name == "build":
            res = case_build(int(args[0]))
        elif name == "grid":
            res = case_grid(args[0], args[1])
        else:
            raise SystemExit(f"unknown case {name}")
        print(json.dumps(res))
    else:
        rep = int(sys.argv[sys.argv.index("--repeat") + 1]) if "--repeat" in sys.argv else 2
        main(repeat=rep)
