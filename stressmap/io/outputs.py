"""Writing result files by suffix: GeoJSON, CSV (with sidecars), CF netCDF and GeoPackage.

Serialising lives in :mod:`stressmap.formats`; this module chooses the format from the file
suffix and writes atomically. Beside a CSV table it writes ``<stem>.csvt`` (GDAL column types),
``<stem>.prj`` (WGS84) and ``<stem>.json`` (the caution and provenance); a GeoPackage carries the
caution as each layer's description and gets the same ``<stem>.json`` sidecar.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

from stressmap.errors import InputError, StorageError, problem
from stressmap.formats import export
from stressmap.formats.gpkg import frame_to_layer, layer_name
from stressmap.formats.table import PRJ_WGS84, frame_csv, frame_csvt, metadata_json
from stressmap.io.files import write_atomic

__all__ = ["POINT_SUFFIXES", "output_kind", "write_points_output", "write_csv_with_sidecars",
           "write_geojson", "write_geopackage"]

#: Suffix -> kind of the point/grid outputs of predict, ensemble and smooth.
POINT_SUFFIXES = {".geojson": "geojson", ".json": "geojson", ".csv": "csv", ".nc": "netcdf",
                  ".gpkg": "gpkg"}


def output_kind(path, allowed=tuple(POINT_SUFFIXES), option: str = "-o") -> str:
    """The output kind of ``path`` by its suffix, or a clear error naming what is accepted."""
    suffix = Path(path).suffix.lower()
    if suffix not in allowed:
        listed = ", ".join(dict.fromkeys(s for s in allowed))
        raise InputError(f"unsupported output type {suffix or '(none)'}: use {listed}",
                         [problem(f"output must end in {listed}", field=option)])
    return POINT_SUFFIXES.get(suffix, suffix.lstrip("."))


def write_csv_with_sidecars(path, csv_text: str, csvt_text: str, meta: dict | None = None) -> Path:
    """A CSV table and its sidecars (``.csvt``, ``.prj``, and ``.json`` when ``meta`` is given)."""
    path = Path(path)
    write_atomic(path.with_suffix(".csvt"), csvt_text)
    write_atomic(path.with_suffix(".prj"), PRJ_WGS84)
    if meta:
        write_atomic(path.with_suffix(".json"), metadata_json(meta, {path.name: "data table"}))
    return write_atomic(path, csv_text)


def write_geojson(path, collection: dict) -> Path:
    """A GeoJSON document (strict JSON: no NaN) written atomically."""
    return write_atomic(path, json.dumps(collection, allow_nan=False, ensure_ascii=False))


def write_geopackage(path, layers: dict, meta: dict | None = None) -> Path:
    """Write GeoDataFrames as named layers of one GeoPackage, atomically (``{name: gdf}``)."""
    import pyogrio

    path = Path(path)
    description = (meta or {}).get("caution")
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.", suffix=".gpkg", dir=path.parent)
    os.close(fd)
    os.unlink(tmp)  # GDAL creates the file itself
    try:
        for i, (name, gdf) in enumerate(layers.items()):
            options = {"DESCRIPTION": description} if description else None
            # GeoPackage 1.3: read without warnings by GDAL releases older than the bundled one
            pyogrio.write_dataframe(gdf, tmp, layer=layer_name(name), driver="GPKG",
                                    layer_options=options,
                                    dataset_options={"VERSION": "1.3"} if i == 0 else None)
        os.replace(tmp, path)
    except (OSError, RuntimeError, ValueError) as exc:  # pyogrio errors derive from these
        raise StorageError(f"could not write {path.name}: {exc}") from exc
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    if meta:
        write_atomic(path.with_suffix(".json"),
                     metadata_json(meta, {path.name: "layers " + ", ".join(
                         layer_name(n) for n in layers)}))
    return path


def write_points_output(path, ds, meta: dict, extra_properties=None, *, grid: bool = False,
                        flat=None) -> Path:
    """Write a point or grid result Dataset to ``path`` in the format its suffix names.

    ``flat`` optionally gives the table form (e.g. ensemble percentiles as columns) used for
    GeoJSON, CSV and GeoPackage; netCDF always gets ``ds`` itself.
    """
    path = Path(path)
    kind = output_kind(path)
    table_ds = ds if flat is None else flat
    if kind == "netcdf":
        return write_atomic(path, export.netcdf_bytes(ds, meta))
    name = path.stem
    if kind == "geojson":
        doc = (export.grid_geojson(table_ds, meta, name=name) if grid
               else export.points_geojson(table_ds, extra_properties, meta, name=name))
        return write_geojson(path, doc)
    frame = export.grid_frame(table_ds) if grid else export.points_frame(table_ds, extra_properties)
    if kind == "csv":
        return write_csv_with_sidecars(path, frame_csv(frame), frame_csvt(frame), meta)
    return write_geopackage(path, {name: frame_to_layer(frame)}, meta)
