"""Benchmark of the thin-sheet solver (issue 3, item 8). Prints figures; never part of the tests.

Three parts, each case in its own subprocess so that peak memory (max RSS) belongs to it:

1. **Planar problem, ours vs scikit-fem on the same mesh** (about 20k, 80k and 320k DOF):
   a square of 1000 km, P1 plane stress, west edge held, east edge pushed and sheared. Both
   codes assemble the same stiffness matrix (P1 on one mesh) and solve the same system, so the
   displacement difference is printed as a check. scikit-fem uses its default path
   (``skfem.solve(*skfem.condense(...))``, scipy's SuperLU with COLAMD). Figures: mesh,
   assembly, factorisation, first solve, each further load case, stress recovery, re-weighting,
   peak memory, and the ratios ours / scikit-fem.
2. **Full builds of a ~1.5e7 km^2 plate** (the fictional demo plate scaled up) at 25 km and 10 km
   edges: mesh, assembly, factorisation, every load group, stress recovery.
3. **Re-weighting and 50,000 grid points** on the 25 km model, compared with its rebuild.

Run: ``.venv/bin/python benchmarks/solver.py`` (add ``--quick`` to skip the 320k DOF and 10 km
cases).
"""

from __future__ import annotations

import copy
import json
import resource
import subprocess
import sys
import time
from importlib import resources

import numpy as np

TARGETS = {
    "assembly_ratio": 0.7,
    "solve_ratio": 0.5,
    "further_case_fraction": 0.05,
    "build_25km_s": 5.0,
    "build_10km_s": 30.0,
    "build_10km_gib": 4.0,
    "grid_50k_s": 1.0,
    "grid_speedup": 100.0,
}


def peak_rss_gib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2  # kB -> GiB on Linux


def _planar_mesh(n_side):
    import skfem

    t0 = time.perf_counter()
    grid = np.linspace(0.0, 1.0e6, n_side)
    m = skfem.MeshTri.init_tensor(grid, grid)
    return m, time.perf_counter() - t0


def _planar_loads(xyz, edges_east):
    """Nodal loads (2n, 5) of five load cases on the east edge (push, shear, and mixes)."""
    from stressmap.fem import loads

    out = []
    for push, shear in ((2e12, 0.0), (0.0, 1e12), (1e12, 1e12), (-1e12, 0.5e12), (0.5e12, -1e12)):
        f = loads.edge_line_loads(xyz, edges_east, push, shear, planar=True)
        out.append(f[:, :2].reshape(-1))
    return np.stack(out, axis=1)


def _east_edges(xyz):
    east = np.flatnonzero(np.isclose(xyz[:, 0], 1.0e6))
    east = east[np.argsort(xyz[east, 1])]
    return np.c_[east[:-1], east[1:]]  # traversed northward: interior (west) on the left


def case_planar_ours(n_side):
    from stressmap.fem import sheet

    m, t_mesh = _planar_mesh(n_side)
    xyz = np.c_[m.p.T, np.zeros(m.p.shape[1])]
    tri = np.ascontiguousarray(m.t.T, dtype=np.int64)
    t0 = time.perf_counter()
    sh = sheet.make_sheet(xyz, tri, 1e5, 7e10, 0.25, planar=True)
    k = sheet.assemble_stiffness(sh)
    t_asm = time.perf_counter() - t0
    west = np.flatnonzero(np.isclose(xyz[:, 0], 0.0))
    fixed = np.r_[2 * west, 2 * west + 1]
    rhs = _planar_loads(xyz, _east_edges(xyz))
    t0 = time.perf_counter()
    factor = sheet.factorise(sh, k, fixed)
    t_fact = time.perf_counter() - t0
    t0 = time.perf_counter()
    u0 = factor.solve(rhs[:, 0])
    t_first = time.perf_counter() - t0
    t0 = time.perf_counter()
    u_rest = factor.solve(rhs[:, 1:])
    t_further = (time.perf_counter() - t0) / (rhs.shape[1] - 1)
    u = np.column_stack([u0, u_rest])
    t0 = time.perf_counter()
    nodal = sheet.nodal_membrane_forces(sh, u)  # (5, n, 3)
    t_stress = time.perf_counter() - t0
    w = np.array([1.0, 0.5, 2.0, 0.0, 1.5])
    t0 = time.perf_counter()
    combined = np.einsum("g,gnc->nc", w, nodal)
    t_reweight = time.perf_counter() - t0
    del combined
    return {"dofs": sh.n_dofs, "mesh_s": t_mesh, "assembly_s": t_asm, "factorise_s": t_fact,
            "first_solve_s": t_first, "further_case_s": t_further, "stress_s": t_stress,
            "reweight_s": t_reweight, "peak_gib": peak_rss_gib(),
            "u_first": u0[::97].tolist()}


def case_planar_skfem(n_side):
    import skfem
    from skfem.helpers import ddot, sym_grad, trace

    m, _ = _planar_mesh(n_side)
    xyz = np.c_[m.p.T, np.zeros(m.p.shape[1])]
    c = 7e10 * 1e5 / (1 - 0.25**2)
    lam, mu = c * 0.25, c * 0.375  # plane-stress membrane constants

    @skfem.BilinearForm
    def stiffness(u, v, w):
        eu, ev = sym_grad(u), sym_grad(v)
        return 2 * mu * ddot(eu, ev) + lam * trace(eu) * trace(ev)

    t0 = time.perf_counter()
    basis = skfem.Basis(m, skfem.ElementVector(skfem.ElementTriP1()))
    k = stiffness.assemble(basis)
    t_asm = time.perf_counter() - t0
    rhs = _planar_loads(xyz, _east_edges(xyz))[:, 0]
    f = np.zeros(k.shape[0])
    f[basis.nodal_dofs[0]] = rhs[0::2]
    f[basis.nodal_dofs[1]] = rhs[1::2]
    fixed = basis.get_dofs(lambda x: np.isclose(x[0], 0.0)).all()
    t0 = time.perf_counter()
    u = skfem.solve(*skfem.condense(k, f, D=fixed))
    t_solve = time.perf_counter() - t0
    ours_layout = np.empty(k.shape[0])
    ours_layout[0::2] = u[basis.nodal_dofs[0]]
    ours_layout[1::2] = u[basis.nodal_dofs[1]]
    return {"assembly_s": t_asm, "solve_s": t_solve, "peak_gib": peak_rss_gib(),
            "u_first": ours_layout[::97].tolist()}


def scaled_demo(edge_km, target_km2=1.5e7):
    """The fictional demo plate enlarged about its centre to about ``target_km2``, no local
    refinement, uniform ``edge_km``."""
    doc = json.loads(resources.files("stressmap.data").joinpath("demo_plate.json")
                     .read_text(encoding="utf-8"))
    from stressmap.model import plate

    area = plate.parse_plate(doc).area_km2
    s = float(np.sqrt(target_km2 / area))
    coords = np.concatenate([np.asarray(f["geometry"]["coordinates"], float)
                             for f in doc["boundary"]["features"]])
    lon0, lat0 = coords.mean(axis=0)

    def scale(c):
        c = np.asarray(c, float)
        return np.c_[lon0 + s * (c[:, 0] - lon0), lat0 + s * (c[:, 1] - lat0)].tolist()

    out = copy.deepcopy(doc)
    for f in out["boundary"]["features"]:
        f["geometry"]["coordinates"] = scale(f["geometry"]["coordinates"])
    for f in out.get("provinces", {}).get("features", []):
        f["geometry"]["coordinates"] = [scale(r) for r in f["geometry"]["coordinates"]]
    out["mesh"] = {"edge_km": float(edge_km)}
    out["name"] = f"benchmark plate (fictional, demo scaled x{s:.3f})"
    return out


def case_build(edge_km, grid=False):
    from stressmap import model

    doc = scaled_demo(edge_km)
    t0 = time.perf_counter()
    built = model.build_model(doc)
    t_build = time.perf_counter() - t0
    out = {"edge_km": edge_km, "build_s": t_build, "dofs": built.summary["dofs"],
           "area_km2": built.summary["mesh"]["exact_area_km2"],
           "groups": len(built.groups), "timings": built.summary["timings"],
           "peak_gib": peak_rss_gib()}
    if grid:
        lon, lat = built.fields["lon"].values, built.fields["lat"].values
        bbox = (float(lon.min()), float(lat.min()), float(lon.max()), float(lat.max()))
        # spacing that gives about 50,000 grid nodes over the bounding box
        width_km = (bbox[2] - bbox[0]) * 111.19 * np.cos(np.radians(0.5 * (bbox[1] + bbox[3])))
        height_km = (bbox[3] - bbox[1]) * 111.19
        spacing = float(np.sqrt(width_km * height_km / 50_000))
        weights = {g: 1.0 + 0.1 * i for i, g in enumerate(built.groups)}
        model.predict_grid(built, bbox, spacing * 4, weights)  # warm the point-location cache
        t0 = time.perf_counter()
        ds = model.predict_grid(built, bbox, spacing, weights)
        out["grid_s"] = time.perf_counter() - t0
        out["grid_points"] = int(ds.sizes["lat"] * ds.sizes["lon"])
        out["grid_inside"] = int(ds["inside"].sum())
    return out


def run_case(*args) -> dict:
    """Run one case in a fresh interpreter; return its JSON result."""
    proc = subprocess.run([sys.executable, __file__, "--case", *map(str, args)],
                          capture_output=True, text=True, check=False)
    if proc.returncode != 0:
        raise RuntimeError(f"case {args} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(quick=False):
    print("stressmap solver benchmark (wall-clock seconds; peak = max RSS of the case's process)")
    print()
    print("1. planar P1 plane stress, same mesh and system: ours vs scikit-fem default solve")
    hdr = (f"{'DOF':>8} {'mesh':>6} {'asm':>6} {'skf asm':>7} {'ratio':>5} | {'fact':>6} "
           f"{'1st':>5} {'f+1st':>6} {'skf sol':>7} {'ratio':>5} | {'next/fact':>9} {'stress':>6} "
           f"{'rewt':>6} | {'peak':>5} {'skf pk':>6} | {'max|du|/|u|':>10}")
    print(hdr)
    sizes = (101, 201) if quick else (101, 201, 401)
    for n_side in sizes:
        a = run_case("planar_ours", n_side)
        b = run_case("planar_skfem", n_side)
        ua, ub = np.asarray(a["u_first"]), np.asarray(b["u_first"])
        du = np.abs(ua - ub).max() / np.abs(ub).max()
        whole = a["factorise_s"] + a["first_solve_s"]
        print(f"{a['dofs']:>8} {a['mesh_s']:6.2f} {a['assembly_s']:6.2f} {b['assembly_s']:7.2f} "
              f"{a['assembly_s'] / b['assembly_s']:5.2f} | {a['factorise_s']:6.2f} "
              f"{a['first_solve_s']:5.2f} {whole:6.2f} {b['solve_s']:7.2f} "
              f"{whole / b['solve_s']:5.2f} | {a['further_case_s'] / a['factorise_s']:9.3f} "
              f"{a['stress_s']:6.2f} {a['reweight_s']:6.3f} | {a['peak_gib']:5.2f} "
              f"{b['peak_gib']:6.2f} | {du:10.1e}")
    print(f"   targets: assembly ratio <= {TARGETS['assembly_ratio']}, factorise + first solve "
          f"ratio <= {TARGETS['solve_ratio']} (80k, 320k DOF), next/fact <= "
          f"{TARGETS['further_case_fraction']}")
    print()
    print("2. full builds of a ~1.5e7 km^2 plate (mesh, assemble, factorise, all groups, stress)")
    edges = (25.0,) if quick else (25.0, 10.0)
    builds = {}
    for edge in edges:
        r = run_case("build", edge, int(edge == 25.0))
        builds[edge] = r
        t = r["timings"]
        print(f"   edge {edge:4.0f} km: {r['dofs']:>7} DOF, area {r['area_km2']:.3g} km^2, "
              f"{r['groups']} groups: build {r['build_s']:.2f} s (validate {t['validate_s']:.2f}, "
              f"mesh {t['mesh_s']:.2f}, assemble {t['assemble_s']:.2f}, factorise "
              f"{t['factorise_s']:.2f}, loads {t['loads_s']:.2f}, solve {t['solve_s']:.2f}, recover "
              f"{t['recover_s']:.2f}), peak {r['peak_gib']:.2f} GiB")
    print(f"   targets: 25 km < {TARGETS['build_25km_s']} s; 10 km < {TARGETS['build_10km_s']} s "
          f"and < {TARGETS['build_10km_gib']} GiB")
    print()
    r = builds[25.0]
    print("3. re-weighting + grid evaluation on the 25 km model")
    print(f"   {r['grid_points']} grid points ({r['grid_inside']} inside): {r['grid_s']:.3f} s; "
          f"rebuild {r['build_s']:.2f} s; speed-up x{r['build_s'] / r['grid_s']:.0f} "
          f"(targets < {TARGETS['grid_50k_s']} s, >= x{TARGETS['grid_speedup']:.0f})")


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--case":
        name, args = sys.argv[2], sys.argv[3:]
        if name == "planar_ours":
            res = case_planar_ours(int(args[0]))
        elif name == "planar_skfem":
            res = case_planar_skfem(int(args[0]))
        elif name == "build":
            res = case_build(float(args[0]), grid=bool(int(args[1])))
        else:
            raise SystemExit(f"unknown case {name}")
        print(json.dumps(res))
    else:
        main(quick="--quick" in sys.argv)
