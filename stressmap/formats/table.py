"""Plain CSV tables that GIS readers open as point layers, and their sidecars.

Rules for every CSV stressmap writes (CLI files and HTTP bodies alike):

- the first line is the header; no comment lines. Provenance and the caution travel in a
  metadata sidecar (:func:`metadata_json`), HTTP headers and the JSON/GeoJSON bodies instead;
- ``lon`` and ``lat`` (degrees, WGS84) are columns of every table (first, unless the input's order
  is echoed, as for indicator files);
- booleans are ``true``/``false``; empty cells are nulls; floats are rounded to 10 significant
  digits;
- text cells that a spreadsheet would run as a formula (``=``, ``+``, ``-``, ``@``, tab, CR) get a
  leading apostrophe unless they are numbers (OWASP CSV injection);
- beside a file: ``<stem>.csvt`` gives GDAL's CSV reader the column types (``CoordX``/``CoordY``
  for lon/lat, so it builds Point geometries) and ``<stem>.prj`` the CRS (WGS84 lon/lat). Without
  sidecars (an HTTP body), GDAL opens the table as points with the open options
  ``X_POSSIBLE_NAMES=lon Y_POSSIBLE_NAMES=lat KEEP_GEOM_COLUMNS=NO AUTODETECT_TYPE=YES``.
"""

from __future__ import annotations

import json
import math

import numpy as np

from stressmap.formats.geojson import round_array

__all__ = ["frame_csv", "frame_csvt", "metadata_json", "metadata_headers", "PRJ_WGS84",
           "GDAL_CSV_OPEN_OPTIONS", "csv_cell"]

_FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")
#: Significant digits of floating-point CSV cells.
CSV_DIGITS = 10

#: WGS84 geographic lon/lat in the ESRI WKT1 flavour that .prj sidecars hold (from EPSG:4326).
PRJ_WGS84 = ('GEOGCS["GCS_WGS_1984",DATUM["D_WGS_1984",SPHEROID["WGS_1984",6378137.0,'
             '298.257223563]],PRIMEM["Greenwich",0.0],UNIT["Degree",0.0174532925199433]]')

#: GDAL CSV open options that make a sidecar-less table a typed point layer.
GDAL_CSV_OPEN_OPTIONS = ("X_POSSIBLE_NAMES=lon", "Y_POSSIBLE_NAMES=lat", "KEEP_GEOM_COLUMNS=NO",
                         "AUTODETECT_TYPE=YES")


def _is_number(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def csv_cell(value):
    """One cell: booleans as true/false, formula-like text neutralised, nulls empty.

    Examples
    --------
    >>> [csv_cell(v) for v in (True, "=cmd()", "-5", None, float("nan"), 3)]
    ['true', "'=cmd()", '-5', None, None, 3]
    """
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, str):
        if value.startswith(_FORMULA_PREFIXES) and not _is_number(value):
            return "'" + value
        return value
    if value is None or (isinstance(value, (float, np.floating)) and not math.isfinite(value)):
        return None
    return value


def _kind(series) -> str:
    """GDAL CSVT type of one column."""
    from pandas.api.types import is_bool_dtype, is_float_dtype, is_integer_dtype

    if is_bool_dtype(series.dtype):
        return "Integer(Boolean)"
    if is_integer_dtype(series.dtype):
        return "Integer64" if len(series) and np.abs(series.to_numpy()).max() > 2**31 - 1 else "Integer"
    if is_float_dtype(series.dtype):
        return "Real"
    values = [v for v in series.tolist() if v is not None and not (isinstance(v, float) and v != v)]
    if values and all(isinstance(v, (bool, np.bool_)) for v in values):
        return "Integer(Boolean)"
    if values and all(isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_))
                      for v in values):
        return "Integer"
    if values and all(isinstance(v, (int, float, np.integer, np.floating))
                      and not isinstance(v, (bool, np.bool_)) for v in values):
        return "Real"
    return "String"


def _ordered(frame):
    return frame[[c for c in frame.columns if c != "geometry"]]


def frame_csv(frame) -> str:
    """CSV text of a pandas DataFrame by the rules of this module.

    Examples
    --------
    >>> import pandas as pd
    >>> f = pd.DataFrame({"name": ["=x", "b"], "lat": [2.0, 3.5], "lon": [1.0, None],
    ...                   "inside": [True, False]})
    >>> print(frame_csv(f), end="")
    name,lat,lon,inside
    '=x,2.0,1.0,true
    b,3.5,,false
    """
    import pandas as pd
    from pandas.api.types import is_bool_dtype, is_float_dtype

    out = _ordered(frame).copy()
    for c in out.columns:
        if is_bool_dtype(out[c].dtype):  # numpy bool or pandas' nullable boolean
            out[c] = [None if v is None or v is pd.NA else ("true" if v else "false")
                      for v in out[c].tolist()]
        elif is_float_dtype(out[c].dtype):  # 10 significant digits, vectorised (no per-cell format)
            out[c] = round_array(out[c].to_numpy(dtype=float), CSV_DIGITS)
        elif out[c].dtype.kind in "OUST":
            out[c] = out[c].map(csv_cell)
    return out.to_csv(index=False, lineterminator="\n", na_rep="")


def frame_csvt(frame) -> str:
    """GDAL CSVT line for :func:`frame_csv` of the same frame (lon/lat as CoordX/CoordY).

    Examples
    --------
    >>> import pandas as pd
    >>> frame_csvt(pd.DataFrame({"lon": [1.0], "lat": [2.0], "n": [3], "ok": [True], "s": ["a"]}))
    '"CoordX","CoordY","Integer","Integer(Boolean)","String"\\n'
    """
    out = _ordered(frame)
    kinds = []
    for c in out.columns:
        kinds.append({"lon": "CoordX", "lat": "CoordY"}.get(c) or _kind(out[c]))
    return ",".join(f'"{k}"' for k in kinds) + "\n"


def metadata_json(meta: dict, files: dict | None = None) -> str:
    """The metadata sidecar: ``meta`` (caution, model id, build time, ...) as a JSON object.

    ``files`` optionally describes the data file(s) the sidecar goes with (name -> description).

    Examples
    --------
    >>> print(metadata_json({"caution": "c", "model_id": "m"}))
    {
     "caution": "c",
     "model_id": "m"
    }
    """
    doc = {k: _json_value(v) for k, v in meta.items()}
    if files:
        doc["files"] = files
    return json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False)


def _json_value(v):
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    if isinstance(v, dict):
        return {str(k): _json_value(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_json_value(x) for x in v]
    return v


def metadata_headers(meta: dict, limit: int = 2000) -> dict:
    """``meta`` as HTTP response headers ``X-Stressmap-<Key>`` (for CSV bodies, which hold none).

    Values are single-line ASCII (other characters escaped as ``\\uXXXX``; lists and objects as
    JSON) cut to ``limit`` characters.

    Examples
    --------
    >>> metadata_headers({"caution": "Screening only.", "model_id": "ab12", "weights": {"ridge": 1.2}})
    {'X-Stressmap-Caution': 'Screening only.', 'X-Stressmap-Model-Id': 'ab12', 'X-Stressmap-Weights': '{"ridge": 1.2}'}
    """
    out = {}
    for key, value in meta.items():
        if value is None:
            continue
        text = json.dumps(_json_value(value), sort_keys=True) if isinstance(value, (dict, list, tuple)) \
            else str(value)
        text = " ".join(text.split()).encode("ascii", "backslashreplace").decode("ascii")  # 1 line
        name = "X-Stressmap-" + "-".join(part.capitalize() for part in str(key).split("_"))
        out[name] = text[:limit]
    return out
