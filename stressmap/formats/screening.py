"""Site screenings as JSON, GeoJSON and CSV, and screening requests from a JSON body (no paths).

:func:`parse_request_json` reads the parts of a request that arrive as GeoJSON (``faults``,
``uncertainty.indicators``) and validates the rest with
:func:`stressmap.analyses.site_request.parse_request`, reporting every problem at once.
:func:`result_json`, :func:`result_geojson` and :func:`result_csv` serialise a
:class:`stressmap.analyses.site_result.ScreenResult`; each carries :data:`stressmap.constants.CAUTION`.
"""

from __future__ import annotations

import io
import math

import numpy as np
import pandas as pd

from stressmap.analyses.site_request import ScreenRequest, parse_request
from stressmap.analyses.site_result import ScreenResult
from stressmap.analyses.site_sampling import CURVE_SHARES, fault_margins
from stressmap.constants import CAUTION
from stressmap.errors import InputError
from stressmap.formats.faults import faults_from_geojson
from stressmap.formats.geojson import feature_collection, round_coord, round_number
from stressmap.formats.indicators import indicators_from_geojson
from stressmap.formats.table import frame_csv, frame_csvt

__all__ = ["PLANE_FIELDS", "decode_geojson_parts", "parse_request_json", "result_csv", "result_geojson",
           "result_json", "LAYERS", "screen_layers", "screen_frame", "screen_csv", "screen_csvt", "screen_meta"]


#: Per-plane fields of the JSON/CSV outputs, in order.
PLANE_FIELDS = (
    "rank", "name", "kind", "feature", "segment", "strike_deg", "dip_deg", "dip_direction_deg",
    "normal_stress_mpa", "effective_normal_stress_mpa", "shear_stress_mpa", "slip_tendency",
    "dilation_tendency", "coulomb_failure_stress_mpa", "pore_pressure_margin_mpa", "rake_deg",
    "at_or_beyond_failure",
)
#: Per-plane fields of a sampled screening: the median margin, the central 80 % band of the
#: sampled margins and the share of samples within the margin threshold of failure.
_UNCERTAIN_FIELDS = ("margin_median_mpa", "margin_band_low_mpa", "margin_band_high_mpa",
                     "reactivation_share")



def parse_request_json(doc) -> ScreenRequest:
    """A screening request from a JSON object whose ``faults`` and ``uncertainty.indicators`` are
    GeoJSON FeatureCollections (the HTTP body); all problems reported together."""
    if not isinstance(doc, dict):
        return parse_request(doc)  # raises the "must be an object" problem
    doc, problems = decode_geojson_parts(doc)
    try:
        req = parse_request(doc)
    except InputError as exc:
        problems.extend(exc.problems)
    if problems:
        raise InputError(problems[0]["message"] if len(problems) == 1 else
                         f"{len(problems)} problems with the screening request", problems)
    return req


def decode_geojson_parts(doc: dict) -> tuple[dict, list]:
    """A copy of a request body with ``faults`` and ``uncertainty.indicators`` read from GeoJSON
    (parsed faults, a prepared indicator table), and the problems found in them (parts with
    problems are left out, so the rest can still be checked)."""
    doc = dict(doc)
    problems: list[dict] = []
    if isinstance(doc.get("faults"), dict) and "traces" not in doc["faults"]:
        try:
            doc["faults"] = faults_from_geojson(doc["faults"], field="faults")
        except InputError as exc:
            problems.extend({**p, "field": f"faults.{p['field']}" if p.get("field") and
                             not str(p["field"]).startswith("faults") else p.get("field")}
                            for p in exc.problems)
            doc.pop("faults")
    unc = doc.get("uncertainty")
    if isinstance(unc, dict) and isinstance(unc.get("indicators"), dict):
        unc = doc["uncertainty"] = dict(unc)
        try:
            unc["indicators"] = indicators_from_geojson(unc["indicators"],
                                                        field="uncertainty.indicators")
        except InputError as exc:
            problems.extend(exc.problems)
            unc.pop("indicators")
    return doc, problems


def _plain(v):
    if isinstance(v, (np.floating, float)):
        v = float(v)
        return v if math.isfinite(v) else None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    if isinstance(v, np.ndarray):
        return [_plain(x) for x in v.tolist()]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return v


def _plane_records(result: ScreenResult) -> list[dict]:
    fields = [f for f in PLANE_FIELDS + _UNCERTAIN_FIELDS if f in result.planes]
    if not result.planes or result.planes["strike_deg"].size == 0:
        return []
    frame = pd.DataFrame({f: result.planes[f] for f in fields})
    records = [_plain(r) for r in frame.to_dict("records")]
    for r in records:  # planes given as strike/dip have no trace segment: null, not -1
        if r.get("segment") is not None and r["segment"] < 1:
            r["segment"] = None
    return records


def _fault_summary(result: ScreenResult) -> list[dict]:
    """One entry per input fault or plane: its least margin over its segments, ranked."""
    pl = result.planes
    if not pl or pl["strike_deg"].size == 0:
        return []
    frame = pd.DataFrame({k: pl[k] for k in ("kind", "feature", "name", "rank",
                                             "pore_pressure_margin_mpa", "slip_tendency")})
    frame["kind"] = frame["kind"].replace({"trace segment": "trace"})
    grouped = frame.groupby(["kind", "feature"], sort=False)
    out = grouped.agg(name=("name", "first"), segments=("rank", "size"),
                      least_margin_mpa=("pore_pressure_margin_mpa", "min"),
                      max_slip_tendency=("slip_tendency", "max"),
                      worst_rank=("rank", "min")).reset_index()
    out = out.sort_values("worst_rank", kind="stable")
    records = [_plain(r) for r in out.to_dict("records")]
    curves = fault_margins(result)
    if curves["name"].size:  # the cumulative margin curve of each fault (its least margin)
        share = curves["margin_mpa"] < result.request.margin_threshold_mpa
        by_key = {(str(k), int(f)): (c, float(sh)) for k, f, c, sh in zip(
            curves["kind"], curves["feature"], curves["curve_mpa"], share.mean(axis=0))}
        for rec in records:
            curve, sh = by_key[(str(rec["kind"]), int(rec["feature"]))]
            rec["reactivation_share"] = sh
            rec["margin_curve_mpa"] = _plain(curve)
    return records


def result_json(result: ScreenResult) -> dict:
    """The JSON document of a screening (the CLI's ``--json`` and the service's answer)."""
    site = dict(result.site)
    out = {"caution": CAUTION}
    out["site"] = {"lon": site.pop("lon"), "lat": site.pop("lat")}
    out.update(site)
    if result.model_info:
        out["model"] = result.model_info
    out["planes"] = _plane_records(result)
    out["faults"] = _fault_summary(result)
    out["uncertainty"] = (None if result.uncertainty is None else
                          dict(result.uncertainty, margin_curve_shares=CURVE_SHARES.tolist()))
    out["notes"] = list(result.notes)
    out["conventions"] = ("stress compression positive, MPa; effective stress = total - Pp; "
                          "strike/dip by the right-hand rule (dip direction = strike + 90); "
                          "azimuths clockwise from north; rake of the hanging wall's slip; "
                          "pore_pressure_margin_mpa = pore-pressure increase to Coulomb failure; "
                          "sampled: margin_median_mpa, margin_band_low_mpa..margin_band_high_mpa "
                          "(central 80 % of samples), reactivation_share = share of samples "
                          "with a margin below margin_threshold_mpa; per fault "
                          "margin_curve_mpa = its least margin at the cumulative shares "
                          "uncertainty.margin_curve_shares")
    return _plain(out)


def result_geojson(result: ScreenResult) -> dict:
    """RFC 7946 FeatureCollection: one LineString per trace segment, one Point per plane.

    Planes without a location sit at the site. The site's scalar results and the caution are
    foreign members at the top level.
    """
    records = _plane_records(result)
    geom = result.plane_geometry
    features = []
    for rec, seg in zip(records, geom):  # serialisation of F records (no numerics here)
        if rec["kind"] == "trace segment":
            g = {"type": "LineString", "coordinates": seg.tolist()}
        else:
            xy = seg[0] if np.isfinite(seg[0]).all() else [result.site["lon"], result.site["lat"]]
            g = {"type": "Point", "coordinates": [float(xy[0]), float(xy[1])]}
        features.append({"type": "Feature", "properties": rec, "geometry": g})
    doc = result_json(result)
    doc.pop("planes")
    doc.pop("faults")
    return {"type": "FeatureCollection", "features": features, **doc}


def result_csv(result: ScreenResult) -> str:
    """Per-plane table as CSV with the site results and the caution as '# key: value' lines."""
    doc = result_json(result)
    lines = [f"# caution: {doc['caution']}"]
    for key in ("site", "depth_km", "sv_mpa", "pp_mpa", "shmax_mpa", "shmax_lower_mpa",
                "shmax_upper_mpa", "shmin_mpa", "shmin_lower_mpa", "shmin_upper_mpa",
                "shmax_azimuth_deg", "regime", "shape_ratio", "friction", "cohesion_mpa"):
        lines.append(f"# {key}: {doc[key]}")
    for note in doc["notes"]:
        lines.append(f"# note: {note}")
    buf = io.StringIO()
    fields = [f for f in PLANE_FIELDS + _UNCERTAIN_FIELDS if f in result.planes]
    frame = pd.DataFrame(doc["planes"], columns=fields)
    if "name" in frame:  # keep spreadsheet programs from evaluating names as formulas
        frame["name"] = [("'" + n) if isinstance(n, str) and n[:1] in "=+-@\t\r" else n
                         for n in frame["name"]]
    frame.to_csv(buf, index=False)
    return "\n".join(lines) + "\n" + buf.getvalue()


# -- GIS layers and the point table of a screening ------------------------------------------
# Three layers, one geometry kind each: traces (LineStrings of trace segments), planes (Points at
# a plane's location or the site, at_site true) and sites (the site with its scalar results). The
# CSV table has lon/lat per row (segment midpoint, location or site); the site results and the
# caution go in the metadata (screen_meta).

#: Layer names of a screening, in writing order.
LAYERS = ("traces", "planes", "sites")

_SITE_KEYS = ("depth_km", "sv_mpa", "pp_mpa", "shmax_mpa", "shmax_lower_mpa", "shmax_upper_mpa",
              "shmin_mpa", "shmin_lower_mpa", "shmin_upper_mpa", "shmax_azimuth_deg", "regime",
              "shape_ratio", "friction", "cohesion_mpa")


def screen_meta(result) -> dict:
    """Caution, site results, sources, notes and conventions: the metadata of every output."""
    doc = result_json(result)
    doc.pop("planes")
    doc.pop("faults")
    return doc


def _props(rec: dict) -> dict:
    return {k: round_number(v) for k, v in rec.items()}


def _locations(result, records) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """lon, lat (F,) of each record (segment midpoint, plane location or site) and at_site (F,)."""
    geom = np.asarray(result.plane_geometry, dtype=float).reshape(len(records), -1, 2)
    is_trace = np.array([r["kind"] == "trace segment" for r in records], dtype=bool)
    xy = np.where(is_trace[:, None], geom.mean(axis=1) if geom.size else geom[:, 0], geom[:, 0])
    at_site = ~is_trace & ~np.isfinite(xy).all(axis=1)
    xy[at_site] = [result.site["lon"], result.site["lat"]]
    return xy[:, 0], xy[:, 1], at_site


def screen_layers(result, meta: dict | None = None) -> dict:
    """``{"traces": FC, "planes": FC, "sites": FC}`` (see the module docstring).

    ``meta`` (default :func:`screen_meta`) goes in each collection's top-level members.
    """
    meta = screen_meta(result) if meta is None else meta
    doc = result_json(result)
    records = doc["planes"]
    traces, planes = [], []
    if records:
        lon, lat, at_site = _locations(result, records)
        geom = np.asarray(result.plane_geometry, dtype=float)
        for i, rec in enumerate(records):  # serialisation of F records (no numerics here)
            if rec["kind"] == "trace segment":
                coords = round_coord(geom[i]).tolist()
                traces.append({"type": "Feature", "properties": _props(rec),
                               "geometry": {"type": "LineString", "coordinates": coords}})
            else:
                props = _props(rec) | {"at_site": bool(at_site[i])}
                planes.append({"type": "Feature", "properties": props, "geometry": {
                    "type": "Point", "coordinates": [round_coord(lon[i]), round_coord(lat[i])]}})
    site = {k: round_number(doc.get(k)) for k in _SITE_KEYS if k in doc}
    site["sources"] = doc.get("sources")
    sites = [{"type": "Feature", "properties": site, "geometry": {
        "type": "Point", "coordinates": [round_coord(doc["site"]["lon"]),
                                         round_coord(doc["site"]["lat"])]}}]
    return {"traces": feature_collection(traces, "traces", meta),
            "planes": feature_collection(planes, "planes", meta),
            "sites": feature_collection(sites, "sites", meta)}


def screen_frame(result):
    """Every plane and trace segment as a DataFrame with lon/lat first (ranked as screened)."""
    import pandas as pd

    records = result_json(result)["planes"]
    frame = pd.DataFrame.from_records(records)
    if not records:
        return pd.DataFrame({"lon": [], "lat": []})
    lon, lat, at_site = _locations(result, records)
    frame.insert(0, "at_site", at_site)
    frame.insert(0, "lat", lat)
    frame.insert(0, "lon", lon)
    return frame


def screen_csv(result) -> str:
    """The table of :func:`screen_frame` as CSV (header first, booleans true/false)."""
    return frame_csv(screen_frame(result))


def screen_csvt(result) -> str:
    """GDAL CSVT sidecar line for :func:`screen_csv`."""
    return frame_csvt(screen_frame(result))
