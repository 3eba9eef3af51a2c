"""Feature collections of a built model for OGC API - Features, and their bbox index (no paths).

Each collection is a list of GeoJSON Features (RFC 7946, lon/lat WGS84 read as CRS84) with an
``id``, plus an ``(n, 4)`` array of the features' bounding boxes so that a ``bbox`` query and
paging are array operations:

- ``outline``: the plate as one Polygon (the boundary ring, counter-clockwise);
- ``boundary``: one LineString per boundary segment (built by the caller, e.g. with the forces);
- ``field``: predicted stress at the nodes of a regular lon/lat grid over the plate
  (:func:`field_features`; the spacing is the collection's documented ``spacing_km``);
- ``indicators``: stored indicators with their misfit (:func:`indicators_features`).

Coordinates and numbers are rounded as :mod:`stressmap.formats.geojson` documents. Longitudes
are reported in [-180, 180]; a ring crossing the antimeridian keeps continuous longitudes (which
may pass 180) so that the polygon stays valid, as RFC 7946 allows for readers that unwrap.
"""

from __future__ import annotations

import numpy as np

from stressmap.formats.export import grid_geojson
from stressmap.formats.geojson import round_coord, round_number

__all__ = ["plate_bbox", "outline_features", "field_features", "indicators_features",
           "with_ids", "feature_bboxes", "select"]


def plate_bbox(ring_lon, ring_lat, margin_deg: float = 0.0) -> tuple[float, float, float, float]:
    """(W, S, E, N) of a ring; W > E when it crosses the antimeridian.

    Examples
    --------
    >>> plate_bbox([170, -170, -170, 170], [-10, -10, 10, 10])
    (170.0, -10.0, -170.0, 10.0)
    >>> plate_bbox([0, 10, 10, 0], [0, 0, 5, 5])
    (0.0, 0.0, 10.0, 5.0)
    """
    lon = np.degrees(np.unwrap(np.radians(np.asarray(ring_lon, dtype=float))))
    lat = np.asarray(ring_lat, dtype=float)
    w, e = float(lon.min()) - margin_deg, float(lon.max()) + margin_deg
    s = max(float(lat.min()) - margin_deg, -90.0)
    n = min(float(lat.max()) + margin_deg, 90.0)
    if e - w >= 360.0:
        return -180.0, s, 180.0, n
    wrap = lambda x: float((x + 180.0) % 360.0 - 180.0) if not -180.0 <= x <= 180.0 else float(x)  # noqa: E731
    return wrap(w), s, wrap(e), n


def outline_features(ring_lon, ring_lat, properties: dict) -> list[dict]:
    """The plate outline as one Polygon Feature (ring closed, longitudes continuous)."""
    lon = np.degrees(np.unwrap(np.radians(np.asarray(ring_lon, dtype=float))))
    if lon.min() < -180.0:
        lon = lon + 360.0
    if lon.max() > 540.0:  # pragma: no cover - unwrap keeps one turn at most
        lon = lon - 360.0
    coords = np.column_stack([round_coord(lon), round_coord(np.asarray(ring_lat, dtype=float))])
    coords = np.vstack([coords, coords[:1]]).tolist()
    props = {k: round_number(v) for k, v in properties.items()}
    return [{"type": "Feature", "id": "outline", "properties": props,
             "geometry": {"type": "Polygon", "coordinates": [coords]}}]


def field_features(grid) -> list[dict]:
    """Grid nodes inside the plate as Point Features (``id`` node-<lat index>-<lon index>)."""
    import xarray as xr

    n_lon = grid.sizes["lon"]
    index = xr.DataArray(np.arange(grid.sizes["lat"] * n_lon).reshape(grid.sizes["lat"], n_lon),
                         dims=("lat", "lon"))
    fc = grid_geojson(grid.assign(node=index))
    for feat in fc["features"]:  # wrap longitudes past 180 (antimeridian grids) and name each node
        x = feat["geometry"]["coordinates"][0]
        if x > 180.0:
            feat["geometry"]["coordinates"][0] = round_coord(x - 360.0)
        node = int(feat["properties"].pop("node"))
        feat["id"] = f"node-{node // n_lon}-{node % n_lon}"
    return fc["features"]


def indicators_features(fc: dict, id_column: str = "id") -> list[dict]:
    """Indicator Features (e.g. from :func:`stressmap.formats.indicators.indicators_geojson`) with
    ``id`` taken from their ``id`` property (or their number)."""
    out = []
    for i, feat in enumerate(fc.get("features") or []):
        ident = (feat.get("properties") or {}).get(id_column)
        out.append(dict(feat, id=str(ident) if ident not in (None, "") else f"indicator-{i + 1}"))
    return out


def with_ids(features: list[dict], prefix: str) -> list[dict]:
    """Features with ``id`` ``<prefix>-<n>`` (1-based) where they have none."""
    return [f if f.get("id") is not None else dict(f, id=f"{prefix}-{i + 1}")
            for i, f in enumerate(features)]


def _coords(geometry) -> np.ndarray:
    """All positions of a geometry as an (k, 2) array."""
    def walk(c):
        if isinstance(c, (list, tuple)) and c and isinstance(c[0], (int, float)):
            yield c[:2]
        elif isinstance(c, (list, tuple)):
            for part in c:
                yield from walk(part)

    pts = list(walk((geometry or {}).get("coordinates") or []))
    return np.asarray(pts, dtype=float).reshape(-1, 2)


def feature_bboxes(features: list[dict]) -> np.ndarray:
    """(n, 4) W, S, E, N per feature (NaN for features without geometry)."""
    out = np.full((len(features), 4), np.nan)
    for i, feat in enumerate(features):  # once per collection, when it is built
        xy = _coords(feat.get("geometry"))
        if xy.size:
            out[i] = [xy[:, 0].min(), xy[:, 1].min(), xy[:, 0].max(), xy[:, 1].max()]
    return out


def select(bboxes: np.ndarray, bbox=None) -> np.ndarray:
    """Indices of the features whose bounding boxes meet ``bbox`` (W, S, E, N; W > E crosses the
    antimeridian); every feature with a geometry when ``bbox`` is None.

    Examples
    --------
    >>> b = np.array([[0, 0, 1, 1], [170, -5, 179, 5], [-179, 0, -178, 1], [5, 5, 6, 6.0]])
    >>> select(b, (0.5, 0.5, 2, 2)).tolist(), select(b, (175, -10, -178.5, 10)).tolist()
    ([0], [1, 2])
    """
    has = np.isfinite(bboxes).all(axis=1)
    if bbox is None:
        return np.flatnonzero(has)
    w, s, e, n = bbox
    lat_ok = (bboxes[:, 1] <= n) & (bboxes[:, 3] >= s)
    # longitudes may run past 180 (continuous rings): test the box shifted by -360, 0 and +360
    spans = [(w, e)] if w <= e else [(w, 180.0), (-180.0, e)]
    lon_ok = np.zeros(len(bboxes), dtype=bool)
    for lo, hi in spans:
        for shift in (-360.0, 0.0, 360.0):
            lon_ok |= (bboxes[:, 0] <= hi + shift) & (bboxes[:, 2] >= lo + shift)
    return np.flatnonzero(has & lat_ok & lon_ok)
