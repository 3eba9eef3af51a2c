"""A FICTIONAL elevation grid for the fictional demo plate: a plateau and a passive margin.

Invented for demonstrations of the GPE load group (body forces from topography). It describes no
real place and must not be used for any real-world decision. The shapes are chosen so the GPE
effect is easy to see:

* the continental shield stands at 400 m;
* a 3,000 m plateau (about 1,000 km across, edges 150 km wide) sits on the shield, centred at
  26 W, 13 S;
* a passive margin follows the shield's border with the oceanic basin: the surface drops from
  200 m to -4,000 m over 250 km on the ocean side;
* the basin deepens from the margin toward nothing in particular: its columns matter only with
  ``ridge_push.mode`` 'gpe', where they come from ages, not from this grid.

Write the grid (CF netCDF) and a copy of the demo plate document with a ``gpe`` table that names
it (the elevation grid path is relative to the document)::

    .venv/bin/python -m stressmap.data.demo_elevation OUTDIR

``--pictures`` also builds that model and draws SHmax and regime without and with the GPE group
(``shmax_without_gpe.png``, ``shmax_with_gpe.png``: the pictures in the README).
"""

from __future__ import annotations

import argparse
import json
import sys
from importlib import resources
from pathlib import Path

import numpy as np
import shapely
import xarray as xr

from stressmap.constants import CAUTION
from stressmap.geo.raster import Raster
from stressmap.model import build_model, plate_outline, predict_grid
from stressmap.plot.maps import shmax_map

__all__ = ["demo_elevation", "demo_gpe_document", "write_demo_gpe", "write_gpe_pictures",
           "PLATEAU", "MARGIN"]

#: Plateau: centre lon, lat (degrees), radius (km), edge width (km), height (m) over the shield.
PLATEAU = (-26.0, -13.0, 500.0, 150.0, 2600.0)
#: Passive margin: shield level (m), deep-ocean level (m), width of the drop (km).
MARGIN = (200.0, -4000.0, 250.0)
_SHIELD_M = 400.0
_KM_PER_DEG = 111.195


def _demo_document() -> dict:
    text = resources.files("stressmap.data").joinpath("demo_plate.json").read_text("utf-8")
    return json.loads(text)


def demo_elevation(spacing_deg: float = 0.1) -> Raster:
    """The fictional elevation grid (m) over the demo plate, on a regular lon/lat grid.

    Examples
    --------
    >>> r = demo_elevation(0.5)
    >>> r.units, r.values.shape, float(r.values.max()) > 2900, float(r.values.min()) < -3900
    ('m', (81, 109), True, True)
    """
    lon = np.round(np.arange(-40.0, 14.0 + 1e-9, spacing_deg), 9)
    lat = np.round(np.arange(-40.0, 0.0 + 1e-9, spacing_deg), 9)
    glon, glat = np.meshgrid(lon, lat)
    doc = _demo_document()
    basin = next(f for f in doc["provinces"]["features"]
                 if f["properties"]["lithosphere"] == "oceanic")
    shield = next(f for f in doc["provinces"]["features"]
                  if f["properties"]["lithosphere"] == "continental")
    basin_poly = shapely.Polygon(basin["geometry"]["coordinates"][0])
    margin_line = shapely.intersection(basin_poly.boundary,
                                       shapely.Polygon(shield["geometry"]["coordinates"][0]).boundary)
    # distances in km in a local equirectangular frame (fine for a fictional shape)
    scale = np.cos(np.radians(-20.0))
    pts = shapely.points(glon.ravel() * scale, glat.ravel())
    margin_scaled = shapely.affinity.scale(margin_line, xfact=scale, yfact=1.0, origin=(0, 0))
    d_km = shapely.distance(pts, margin_scaled).reshape(glon.shape) * _KM_PER_DEG
    in_basin = shapely.contains_xy(basin_poly, glon, glat)
    top, deep, width = MARGIN
    ramp = np.clip(d_km / width, 0.0, 1.0)
    ocean = top + (deep - top) * (3 * ramp**2 - 2 * ramp**3)  # smooth step
    land = np.full(glon.shape, _SHIELD_M)
    c_lon, c_lat, radius, edge, height = PLATEAU
    r_km = _KM_PER_DEG * np.hypot((glon - c_lon) * np.cos(np.radians(c_lat)), glat - c_lat)
    land = land + height * 0.5 * (1.0 - np.tanh((r_km - radius) / (0.5 * edge)))
    land = np.minimum(land, top + (land - top) * np.clip(d_km / width + 0.5, 0.0, 1.0))
    values = np.where(in_basin, ocean, land)
    return Raster(lon, lat, values, "elevation", "m")


def demo_gpe_document(elevation_ref: str = "demo_elevation.nc") -> dict:
    """The demo plate document with a ``gpe`` table naming the elevation grid."""
    doc = _demo_document()
    doc["name"] = "Meridia with topography (fictional demo plate)"
    doc["gpe"] = {"elevation_grid": elevation_ref, "elevation_variable": "elevation"}
    return doc


def write_demo_gpe(out_dir) -> tuple[Path, Path]:
    """Write ``demo_elevation.nc`` (CF netCDF) and ``demo_plate_gpe.json`` into ``out_dir``."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    r = demo_elevation()
    ds = xr.Dataset(
        {"elevation": (("lat", "lon"), r.values.astype("float32"),
                       {"standard_name": "height_above_mean_sea_level", "units": "m",
                        "long_name": "FICTIONAL elevation of the demo plate"})},
        coords={"lat": ("lat", r.lat, {"standard_name": "latitude", "units": "degrees_north"}),
                "lon": ("lon", r.lon, {"standard_name": "longitude", "units": "degrees_east"})},
        attrs={"Conventions": "CF-1.8", "title": "FICTIONAL demo elevation (plateau and passive "
               "margin)", "comment": "Invented for demonstrations; describes no real place. "
               + CAUTION})
    grid_path = out / "demo_elevation.nc"
    ds.to_netcdf(grid_path)
    doc_path = out / "demo_plate_gpe.json"
    doc_path.write_text(json.dumps(demo_gpe_document(grid_path.name), indent=1), encoding="utf-8")
    return grid_path, doc_path


def write_gpe_pictures(out_dir, spacing_km: float = 150.0) -> list[Path]:
    """Build the demo with topography and draw SHmax and regime without and with the GPE group."""
    out = Path(out_dir)
    doc = demo_gpe_document("elevation")
    model = build_model(doc, grids={"elevation": demo_elevation()})
    paths = []
    for name, weight, label in (("shmax_without_gpe.png", 0.0, "without"),
                                ("shmax_with_gpe.png", 1.0, "with")):
        ds = predict_grid(model, bbox=(-38.0, -38.0, 11.0, -2.0), spacing_km=spacing_km,
                          weights={"gpe": weight})
        glon, glat = np.meshgrid(ds["lon"].values, ds["lat"].values)
        png = shmax_map(glon.ravel(), glat.ravel(),
                        ds["shmax_azimuth_deg"].transpose("lat", "lon").values.ravel(),
                        ds["regime_index"].transpose("lat", "lon").values.ravel(),
                        plate_outline(model),
                        title=f"SHmax and regime {label} the GPE group (FICTIONAL demo plate)",
                        caption=f"{model.summary['name']} - weights gpe={weight:g}, others 1")
        (out / name).write_bytes(png)
        paths.append(out / name)
    return paths


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out_dir", help="folder to write demo_elevation.nc and demo_plate_gpe.json")
    parser.add_argument("--pictures", action="store_true",
                        help="also draw SHmax and regime without and with the GPE group (PNG)")
    args = parser.parse_args(argv)
    paths = list(write_demo_gpe(args.out_dir))
    if args.pictures:
        paths += write_gpe_pictures(args.out_dir)
    for path in paths:
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
