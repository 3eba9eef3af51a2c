"""Write the hostile-input corpus next to this file (run once; the files are committed).

    .venv/bin/python tests/hostile/make_corpus.py

Every file is one hostile input; tests/test_hostile_inputs.py says where each one is sent and
which specific message must come back. Plates are small made-up quadrilaterals (fictional, like
the demo plate) so that a document that wrongly passed validation would still be cheap.
Large inputs are stored gzip-compressed and unpacked by the test before sending (the service
itself accepts no compressed uploads; ``bodies/gzip_encoded_plate.json.gz`` checks that).
"""

from __future__ import annotations

import copy
import gzip
import json
from pathlib import Path

__all__ = ["main"]

HERE = Path(__file__).resolve().parent


def _seg(coords, kind="collision", **props):
    return {"type": "Feature", "properties": {"kind": kind, **props},
            "geometry": {"type": "LineString", "coordinates": coords}}


def _plate(*segments, **extra) -> dict:
    doc = {"name": "Hostile test plate (fictional)",
           "boundary": {"type": "FeatureCollection", "features": list(segments)}}
    doc.update(extra)
    return doc


#: A valid fictional quadrilateral plate (two segments) that each plate case breaks in one way.
GOOD = _plate(_seg([[0, 0], [10, 0], [10, 10]]), _seg([[10, 10], [0, 10], [0, 0]], "ridge",
                                                       age_myr=40.0))


def _write(rel: str, data) -> None:
    path = HERE / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    if isinstance(data, (dict, list)):
        data = json.dumps(data, allow_nan=True)
    if isinstance(data, str):
        data = data.encode("utf-8")
    if rel.endswith(".gz"):
        data = gzip.compress(data, mtime=0)
    path.write_bytes(data)


def _broken(mutate) -> dict:
    doc = copy.deepcopy(GOOD)
    mutate(doc)
    return doc


def plates() -> None:
    feats = lambda d: d["boundary"]["features"]  # noqa: E731
    _write("plates/unclosed_ring.json",
           _plate(_seg([[0, 0], [10, 0], [10, 10]]), _seg([[10, 10], [0, 10], [0, 1]])))
    _write("plates/self_intersecting_ring.json",
           _plate(_seg([[0, 0], [10, 0], [10, 10], [5, -5]]), _seg([[5, -5], [0, 10], [0, 0]])))
    _write("plates/bow_tie.json",
           _plate(_seg([[0, 0], [10, 10], [10, 0]]), _seg([[10, 0], [0, 10], [0, 0]])))
    _write("plates/duplicate_vertex.json",
           _plate(_seg([[0, 0], [10, 0], [10, 0], [10, 10]]), _seg([[10, 10], [0, 10], [0, 0]])))
    _write("plates/zero_length_segment.json",
           _plate(_seg([[0, 0], [10, 0], [10, 10]]), _seg([[10, 10], [10, 10]]),
                  _seg([[10, 10], [0, 10], [0, 0]])))
    _write("plates/antipodal_arc.json",
           _plate(_seg([[0, 0], [180, 0]]), _seg([[180, 0], [90, 10], [0, 0]])))
    # Over the pole: longitudes beyond 180 instead of wrapping, and latitudes beyond 90.
    _write("plates/pole_latitude_beyond_90.json",
           _plate(_seg([[0, 80], [60, 95], [120, 80]]), _seg([[120, 80], [240, 80], [0, 80]])))
    _write("plates/antimeridian_unwrapped_longitude.json",
           _plate(_seg([[170, -10], [190, -10], [190, 10]]), _seg([[190, 10], [170, 10], [170, -10]])))
    # Crossing the antimeridian the long way round: the ring's edges cross each other.
    _write("plates/antimeridian_crossed_ring.json",
           _plate(_seg([[170, -10], [-170, 10], [-170, -10]]), _seg([[-170, -10], [170, 10], [170, -10]])))
    _write("plates/nan_coordinate.json",
           _broken(lambda d: feats(d)[0]["geometry"]["coordinates"].__setitem__(1, [float("nan"), 0])))
    _write("plates/infinity_age.json",
           _broken(lambda d: feats(d)[1]["properties"].__setitem__("age_myr", float("inf"))))
    _write("plates/huge_coordinate.json",
           _broken(lambda d: feats(d)[0]["geometry"]["coordinates"].__setitem__(1, [1e308, 0])))
    _write("plates/overflowing_number.json",
           json.dumps(GOOD).replace('"age_myr": 40.0', '"age_myr": 1e400'))
    _write("plates/huge_integer.json",
           json.dumps(GOOD).replace('"age_myr": 40.0', '"age_myr": ' + "9" * 5000))
    _write("plates/deeply_nested.json.gz", "[" * 100_000 + "]" * 100_000)
    _write("plates/nested_description.json",
           _broken(lambda d: d.__setitem__("description", json.loads("[" * 500 + "]" * 500))))
    _write("plates/top_level_array.json", [GOOD])
    _write("plates/boundary_not_collection.json",
           _broken(lambda d: d.__setitem__("boundary", "[[0,0],[10,0],[10,10]]")))
    _write("plates/unknown_kind.json",
           _broken(lambda d: feats(d)[0]["properties"].__setitem__("kind", "=cmd|'/C calc'!A0")))
    _write("plates/age_grid_server_path.json",
           _broken(lambda d: d.__setitem__("ridge_push", {"mode": "distributed",
                                                          "age_grid": "/etc/passwd"})))
    _write("plates/age_grid_url.json",
           _broken(lambda d: d.__setitem__("ridge_push", {"mode": "distributed",
                                                          "age_grid": "http://127.0.0.1:1/x.nc"})))
    _write("plates/mesh_too_fine.json", _broken(lambda d: d.__setitem__("mesh", {"edge_km": 0.001})))
    _write("plates/negative_thickness.json",
           _broken(lambda d: d.__setitem__("sheet", {"thickness_km": -100})))
    _write("plates/no_area.json", _plate(_seg([[0, 0], [10, 0]]), _seg([[10, 0], [0, 0]])))
    # 30 000 vertices on a small circle (about 0.07 km apart): refused before it is parsed.
    import math

    n = 30_000
    ring = [[round(5 + 4 * math.cos(2 * math.pi * k / n), 4),
             round(5 + 4 * math.sin(2 * math.pi * k / n), 4)] for k in range(n)]
    _write("plates/enormous_ring.json.gz",
           _plate(_seg(ring[: n // 2 + 1]), _seg(ring[n // 2:] + [ring[0]])))


def plate_files() -> None:
    # Boundary and parameter files for `stressmap model build` (stressmap.io.plate_files).
    _write("plate_files/deeply_nested_boundary.geojson.gz", "[" * 100_000 + "]" * 100_000)
    _write("plate_files/huge_integer_params.json", '{"sheet": {"thickness_km": ' + "7" * 5000 + "}}")
    _write("plate_files/not_utf8_boundary.geojson", b'{"type": "FeatureCollection", "name": "\xe9"}')


def bodies() -> None:
    _write("bodies/not_utf8.json", json.dumps(GOOD).replace("Hostile", "H\u00f6stile")
           .encode("utf-8").replace("H\u00f6stile".encode("utf-8"), b"H\xf6stile"))
    _write("bodies/empty.json", b"")
    _write("bodies/xml_document.xml",
           '<?xml version="1.0"?><!DOCTYPE p [<!ENTITY x SYSTEM "file:///etc/passwd">]>'
           "<plate>&x;</plate>")
    _write("bodies/form_encoded.txt", "name=plate&boundary=%5B%5B0%2C0%5D%5D")
    _write("bodies/gzip_encoded_plate.json.gz", GOOD)  # sent as is, with Content-Encoding: gzip
    # A zip "bomb" uploaded as multipart: 10 MB of zeros compress to about 10 kB.
    import io
    import zipfile

    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as zf:
        info = zipfile.ZipInfo("plate.json", date_time=(2020, 1, 1, 0, 0, 0))
        zf.writestr(info, b"0" * 10_000_000, compress_type=zipfile.ZIP_DEFLATED)
    _write("bodies/zip_bomb.zip", buf.getvalue())


def predictions() -> None:
    _write("predict/nan_point.json", {"points": [[-15.0, -20.0], [float("nan"), -20.0]]})
    _write("predict/infinity_point.json", {"points": [[float("-inf"), -20.0]]})
    _write("predict/huge_numbers.json", {"points": [[1e308, -1e308]]})
    _write("predict/latitude_beyond_pole.json", {"points": [[-15.0, 90.000001]]})
    _write("predict/booleans_as_coordinates.json", {"points": [[True, False]]})
    _write("predict/nested_points.json", {"points": json.loads("[" * 200 + "1" + "]" * 200)})
    _write("predict/enormous_point_list.json.gz", {"points": [[-15.0, -20.0]] * 100_001})
    _write("predict/bow_tie_region.json",
           {"region": {"polygon": {"type": "Polygon", "coordinates": [
               [[-20, -25], [-10, -15], [-10, -25], [-20, -15], [-20, -25]]]}, "spacing_km": 100}})
    _write("predict/two_vertex_polygon.json",
           {"region": {"polygon": {"type": "Polygon", "coordinates": [[[-20, -25], [-10, -15]]]},
                       "spacing_km": 100}})
    _write("predict/bbox_past_pole.json", {"region": {"bbox": [-20, -30, 0, 95], "spacing_km": 50}})
    _write("predict/tiny_spacing.json",
           {"region": {"bbox": [170, -30, -170, -10], "spacing_km": 1e-300}})
    _write("predict/negative_spacing.json", {"region": {"bbox": [-20, -30, 0, -10],
                                                        "spacing_km": -5}})
    _write("predict/integer_beyond_float.json", '{"points": [[' + "9" * 400 + ', -20]]}')
    _write("predict/nan_weight.json", {"points": [[-15.0, -20.0]],
                                       "weights": {"ridge": float("nan")}})
    _write("predict/unknown_weight_group.json", {"points": [[-15.0, -20.0]],
                                                 "weights": {"__import__('os')": 1.0}})
    _write("predict/unknown_format.json", {"points": [[-15.0, -20.0]], "format": "../../etc/passwd"})
    _write("predict/formula_in_format.json", {"points": [[-15.0, -20.0]], "format": "=1+1"})
    _write("predict/csv_text_body.csv", "lon,lat\n-15,-20\n=HYPERLINK(\"http://x\"),1\n")


def queries() -> None:
    # One query string per file, appended to GET /api/v1/models/{model}/field?
    _write("queries/bbox_nan.txt", "bbox=nan,-30,0,-10&spacing_km=100")
    _write("queries/bbox_infinity.txt", "bbox=-20,-30,inf,-10&spacing_km=100")
    _write("queries/bbox_overflow.txt", "bbox=-20,-30,1e400,-10&spacing_km=100")
    _write("queries/bbox_three_values.txt", "bbox=-20,-30,0&spacing_km=100")
    _write("queries/bbox_formula.txt", "bbox=%3DSUM(A1%3AA9),-30,0,-10&spacing_km=100")
    _write("queries/spacing_tiny.txt", "bbox=-20,-30,0,-10&spacing_km=1e-300")
    _write("queries/spacing_subnormal.txt", "bbox=-20,-30,0,-10&spacing_km=5e-324")
    _write("queries/spacing_nan.txt", "bbox=-20,-30,0,-10&spacing_km=NaN")
    _write("queries/non_utf8_bytes.txt", "bbox=%FF%FE,-30,0,-10&spacing_km=100")
    _write("queries/weights_injection.txt", "bbox=-20,-30,0,-10&spacing_km=100&weights=ridge%3D1%3B%20DROP")
    _write("queries/format_path.txt", "bbox=-20,-30,0,-10&spacing_km=100&format=..%2F..%2Fetc%2Fpasswd")
    # Whole request lines (METHOD path), for ids that try to be paths.
    _write("urls/dotdot_model_id.txt", "GET /api/v1/models/..%2F..%2F..%2Fetc%2Fpasswd")
    _write("urls/absolute_model_id.txt", "GET /api/v1/models/%2Fetc%2Fpasswd/boundary")
    _write("urls/index_file_as_id.txt", "DELETE /api/v1/models/..%2Findex.sqlite3")
    _write("urls/nul_byte_id.txt", "GET /api/v1/models/{model}%00")
    _write("urls/uppercase_id.txt", "GET /api/v1/models/{MODEL}")
    _write("urls/dotdot_job_id.txt", "GET /api/v1/jobs/..%2F..%2Findex.sqlite3")
    _write("urls/field_of_path_id.txt", "GET /api/v1/models/~root/field?bbox=0,0,1,1&spacing_km=50")


def faults() -> None:
    line = lambda coords, **p: {"type": "Feature", "properties": p,  # noqa: E731
                                "geometry": {"type": "LineString", "coordinates": coords}}
    point = lambda xy, **p: {"type": "Feature", "properties": p,  # noqa: E731
                             "geometry": {"type": "Point", "coordinates": xy}}
    fc = lambda *f: {"type": "FeatureCollection", "features": list(f)}  # noqa: E731
    _write("faults/trace_single_vertex.geojson", fc(line([[-15.0, -20.0]], dip_deg=60)))
    _write("faults/trace_nan_vertex.geojson",
           fc(line([[-15.0, -20.0], [float("nan"), -20.1]], dip_deg=60)))
    _write("faults/dip_beyond_vertical.geojson", fc(point([-15, -20], strike_deg=30, dip_deg=95)))
    _write("faults/polygon_fault.geojson",
           fc({"type": "Feature", "properties": {"dip_deg": 60}, "geometry": {
               "type": "Polygon", "coordinates": [[[-15, -20], [-14, -20], [-14, -19], [-15, -20]]]}}))
    _write("faults/formula_strike.csv", "strike_deg,dip_deg,name\n=1+1,60,A\n30,60,B\n")
    _write("faults/missing_columns.csv", "azimuth,angle\n30,60\n")
    _write("faults/deeply_nested.geojson.gz", '{"type": "FeatureCollection", "features": '
           + "[" * 100_000 + "]" * 100_000 + "}")
    _write("faults/not_utf8.geojson", b'{"type": "FeatureCollection", "features": [\xff\xfe]}')
    # Sent inside a screening request (POST /screen) as "faults".
    _write("faults/screen_request_bow_tie_trace.json", {
        "site": [-15, -20], "depth_km": 3, "regime": "strike-slip", "shmax_azimuth_deg": 30,
        "faults": fc(line([[-15, -20], [-14, -19], [-15, -19], [-14, -20]], dip_deg=120))})


def indicators() -> None:
    head = "id,lon,lat,type,azimuth_deg,quality\n"
    _write("indicators/formula_injection.csv",
           head + 'A,-15,-20,breakout,"=HYPERLINK(""http://example.invalid"",""x"")",A\n')
    _write("indicators/at_command.csv", head + "B,-15,-20,breakout,@SUM(1+1),A\n")
    _write("indicators/nan_and_infinity.csv", head + "C,nan,-20,breakout,30,A\nD,-15,inf,breakout,30,A\n")
    _write("indicators/latitude_beyond_pole.csv", head + "E,-15,91,breakout,30,A\n")
    _write("indicators/huge_number.csv", head + "F,-15,-20,breakout," + "9" * 400 + ",A\n")
    _write("indicators/not_utf8.csv", head.encode() + b"G,-15,-20,breakout,30,\xc0\xff\n")
    _write("indicators/deeply_nested.geojson.gz", "[" * 100_000 + "]" * 100_000)
    _write("indicators/polygon_geometry.geojson", {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"id": "H", "type": "breakout", "azimuth_deg": 30,
                                           "quality": "A"},
         "geometry": {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]}}]})
    _write("indicators/spreadsheet.xlsx", b"PK\x03\x04" + b"\x00" * 60)


def main() -> None:
    plates()
    plate_files()
    bodies()
    predictions()
    queries()
    faults()
    indicators()


if __name__ == "__main__":
    main()
