"""Hostile inputs (files under tests/hostile/, written by tests/hostile/make_corpus.py).

Specification: every hostile plate model, request body, query string, model/job id, indicator
file and fault file is answered with a 4xx RFC 9457 problem document (``application/problem+json``,
RFC 9457 section 3) whose text names the specific cause, within 5 s, never a 5xx or a hang, and the
stored data (index listing, model and job files) is byte-for-byte unchanged afterwards.

Files the service reads only through a reader (indicator and fault files given to the CLI) are
checked by calling the reader and passing its exception through the service's own error handlers,
so they also end as the problem document a client would get.

Sources: RFC 9457 (problem details), RFC 8259 (JSON has no NaN/Infinity), OWASP "CSV Injection"
(cells starting with = + - @ are formulas), OWASP "Path Traversal"; GeoJSON RFC 7946 for
geometries; the rest is common practice of defensive input handling.
"""

from __future__ import annotations

import gzip
import hashlib
import json
import re
import shutil
import time
from concurrent.futures import ThreadPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from stressmap.errors import InputError
from service_support import store_ready_model

CORPUS = Path(__file__).resolve().parents[1] / "hostile"
TIME_LIMIT_S = 5.0
PROBLEM = "application/problem+json"
REPO = str(Path(__file__).resolve().parents[2])  # this checkout, wherever it lives
LEAKS = re.compile(r"Traceback|site-packages|" + re.escape(REPO) +
                   r"|/tmp/|/root/|\.py\b|File \"")
READER_LEAKS = re.compile(r"Traceback|site-packages|\.py\b|File \"")


@dataclass(frozen=True)
class Case:
    file: str  # relative to tests/hostile
    target: str  # model | predict | field | url | screen | raw | indicators | faults
    status: int
    match: str  # regex that the problem's detail + errors must contain (case-insensitive)
    content_type: str = "application/json"
    headers: dict = field(default_factory=dict)

    def __str__(self):
        return f"{self.target}:{self.file}"


JSON = "application/json"
CASES = [
    # -- plate models (POST /api/v1/models) --------------------------------------------------
    Case("plates/unclosed_ring.json", "model", 422, r"ring not closed: gap of 111\.\d km"),
    Case("plates/self_intersecting_ring.json", "model", 422, r"self-intersecting ring"),
    Case("plates/bow_tie.json", "model", 422, r"self-intersecting ring: segment 0 crosses"),
    Case("plates/duplicate_vertex.json", "model", 422, r"duplicate vertex: position 2 repeats"),
    Case("plates/zero_length_segment.json", "model", 422, r"zero-length segment"),
    Case("plates/antipodal_arc.json", "model", 422, r"spans 180\.0 degrees"),
    Case("plates/pole_latitude_beyond_90.json", "model", 422, r"latitude 95 outside \[-90, 90\]"),
    Case("plates/antimeridian_unwrapped_longitude.json", "model", 422,
         r"longitude 190 outside \[-180, 180\]"),
    Case("plates/antimeridian_crossed_ring.json", "model", 422, r"self-intersecting ring"),
    Case("plates/nan_coordinate.json", "model", 400, r"NaN is not a JSON number"),
    Case("plates/infinity_age.json", "model", 400, r"Infinity is not a JSON number"),
    Case("plates/huge_coordinate.json", "model", 422, r"longitude 1e\+308 outside"),
    Case("plates/overflowing_number.json", "model", 422, r"age_myr.*finite|finite.*inf"),
    Case("plates/huge_integer.json", "model", 400, r"4300 digits"),
    Case("plates/deeply_nested.json.gz", "model", 400, r"nested too deeply"),
    Case("plates/nested_description.json", "model", 400, r"nested too deeply"),
    Case("plates/top_level_array.json", "model", 422, r"must be a JSON object, got"),
    Case("plates/boundary_not_collection.json", "model", 422,
         r"boundary must be a GeoJSON FeatureCollection"),
    Case("plates/unknown_kind.json", "model", 422, r"unknown (segment )?kind"),
    Case("plates/age_grid_server_path.json", "model", 422, r"reads no server files"),
    Case("plates/age_grid_url.json", "model", 422, r"reads no server files"),
    Case("plates/mesh_too_fine.json", "model", 422, r"edge_km must be >= 1, got 0\.001"),
    Case("plates/negative_thickness.json", "model", 422, r"thickness_km must be > 0, got -100"),
    Case("plates/no_area.json", "model", 422, r"encloses no area|zero-length|self-intersect"),
    Case("plates/enormous_ring.json.gz", "model", 422, r"30,002 boundary vertices.*at most 20,000"),
    # -- plate model files (stressmap.io.plate_files, as `stressmap model build` reads them) -----
    Case("plate_files/deeply_nested_boundary.geojson.gz", "plate_files", 422,
         r"not valid GeoJSON: maximum recursion depth"),
    Case("plate_files/huge_integer_params.json", "plate_files", 422,
         r"cannot be parsed: Exceeds the limit \(4300 digits\)"),
    Case("plate_files/not_utf8_boundary.geojson", "plate_files", 422,
         r"not valid GeoJSON: 'utf-8' codec can't decode"),
    # -- request bodies of the wrong kind ---------------------------------------------------
    Case("bodies/not_utf8.json", "model", 400, r"not UTF-8"),
    Case("bodies/empty.json", "model", 400, r"body is empty"),
    # bodies that do not say they are JSON are refused before they are read (415)
    Case("bodies/xml_document.xml", "model", 415, r"Content-Type: application/json",
         content_type="application/xml"),
    Case("bodies/form_encoded.txt", "model", 415, r"Content-Type: application/json",
         content_type="application/x-www-form-urlencoded"),
    Case("bodies/gzip_encoded_plate.json.gz", "raw", 400, r"not UTF-8",
         headers={"Content-Encoding": "gzip"}),
    Case("bodies/zip_bomb.zip", "raw", 415, r"Content-Type: application/json",
         content_type="application/zip"),
    Case("predict/csv_text_body.csv", "predict", 415, r"Content-Type: application/json",
         content_type="text/csv"),
    # -- predictions (POST /api/v1/models/{id}/predict) ------------------------------------
    Case("predict/nan_point.json", "predict", 400, r"NaN is not a JSON number"),
    Case("predict/infinity_point.json", "predict", 400, r"-Infinity is not a JSON number"),
    Case("predict/huge_numbers.json", "predict", 422, r"latitude -1e\+308 is outside \[-90, 90\]"),
    Case("predict/latitude_beyond_pole.json", "predict", 422, r"latitude 90 is outside|90\.000001"),
    Case("predict/booleans_as_coordinates.json", "predict", 422, r"two finite numbers, got \[true"),
    Case("predict/nested_points.json", "predict", 400, r"nested too deeply"),
    Case("predict/enormous_point_list.json.gz", "predict", 422,
         r"100,001 points exceed the limit of 100,000"),
    Case("predict/bow_tie_region.json", "predict", 422, r"invalid polygon: Self-intersection"),
    Case("predict/two_vertex_polygon.json", "predict", 422, r"region\.polygon"),
    Case("predict/bbox_past_pole.json", "predict", 422, r"south -30 must be below north 95"),
    Case("predict/tiny_spacing.json", "predict", 422, r"spacing_km must be >= 0\.001, got 1e-300"),
    Case("predict/integer_beyond_float.json", "predict", 400, r"400 digits\) is too large"),
    Case("predict/negative_spacing.json", "predict", 422, r"spacing_km must be >= 0\.001, got -5"),
    Case("predict/nan_weight.json", "predict", 400, r"NaN is not a JSON number"),
    Case("predict/unknown_weight_group.json", "predict", 422, r"__import__|unknown (load )?group"),
    Case("predict/unknown_format.json", "predict", 422, r"unknown format .*etc/passwd"),
    Case("predict/formula_in_format.json", "predict", 422, r"unknown format"),
    # -- field query strings (GET /api/v1/models/{id}/field?...) ---------------------------
    Case("queries/bbox_nan.txt", "field", 422, r"expected four finite numbers"),
    Case("queries/bbox_infinity.txt", "field", 422, r"expected four finite numbers"),
    Case("queries/bbox_overflow.txt", "field", 422, r"expected four finite numbers"),
    Case("queries/bbox_three_values.txt", "field", 422, r"expected four finite numbers.*\[-20"),
    Case("queries/bbox_formula.txt", "field", 422, r"got '=SUM"),
    Case("queries/spacing_tiny.txt", "field", 422, r"spacing_km must be >= 0\.001"),
    Case("queries/spacing_subnormal.txt", "field", 422, r"spacing_km 4\.94066e-324 is a subnormal number"),
    Case("queries/spacing_nan.txt", "field", 422, r"cannot read 'NaN' as a number"),
    Case("queries/non_utf8_bytes.txt", "field", 422, r"expected four finite numbers .*W,S,E,N"),
    Case("queries/weights_injection.txt", "field", 422, r"cannot read .*DROP.* as group=value"),
    Case("queries/format_path.txt", "field", 422, r"unknown format"),
    # -- ids that try to be paths ----------------------------------------------------------
    Case("urls/dotdot_model_id.txt", "url", 404, r"not found|no model"),
    Case("urls/absolute_model_id.txt", "url", 404, r"not found|no model"),
    Case("urls/index_file_as_id.txt", "url", 404, r"not found|no model"),
    Case("urls/nul_byte_id.txt", "url", 404, r"no model with id .*32 lowercase hex digits"),
    Case("urls/uppercase_id.txt", "url", 404, r"no model with id .*32 lowercase hex digits"),
    Case("urls/dotdot_job_id.txt", "url", 404, r"not found|no job"),
    Case("urls/field_of_path_id.txt", "url", 404, r"no model with id '~root'"),
    # -- fault files (reader) and faults inside a screening request ------------------------
    Case("faults/trace_single_vertex.geojson", "faults", 422, r"two or more \[lon, lat\] vertices"),
    Case("faults/trace_nan_vertex.geojson", "faults", 422, r"NaN|two or more \[lon, lat\]"),
    Case("faults/dip_beyond_vertical.geojson", "faults", 422, r"dip_deg must be <= 90, got 95"),
    Case("faults/polygon_fault.geojson", "faults", 422, r"geometry type 'Polygon' is not a fault"),
    Case("faults/formula_strike.csv", "faults", 422, r"strike_deg"),
    Case("faults/missing_columns.csv", "faults", 422, r"lacks column\(s\) strike_deg, dip_deg"),
    Case("faults/deeply_nested.geojson.gz", "faults", 422, r"maximum recursion depth"),
    Case("faults/not_utf8.geojson", "faults", 422, r"cannot read fault file|utf-8"),
    Case("faults/screen_request_bow_tie_trace.json", "screen", 422,
         r"dip_deg must be <= 90, got 120"),
    # -- indicator files (reader) ----------------------------------------------------------
    Case("indicators/formula_injection.csv", "indicators", 422, r"azimuth_deg.*HYPERLINK|HYPERLINK"),
    Case("indicators/at_command.csv", "indicators", 422, r"@SUM"),
    Case("indicators/nan_and_infinity.csv", "indicators", 422, r"lon|lat"),
    Case("indicators/latitude_beyond_pole.csv", "indicators", 422, r"91"),
    Case("indicators/huge_number.csv", "indicators", 422, r"azimuth_deg"),
    Case("indicators/not_utf8.csv", "indicators", 422, r"not UTF-8"),
    Case("indicators/deeply_nested.geojson.gz", "indicators", 422, r"nested|not valid JSON|depth"),
    Case("indicators/polygon_geometry.geojson", "indicators", 422, r"must be a Point"),
    Case("indicators/spreadsheet.xlsx", "indicators", 422, r"unsupported indicator file type '\.xlsx'"),
    # -- the same indicator files sent to the service (POST /models/{id}/compare) -----------
    Case("indicators/formula_injection.csv", "compare", 422, r"HYPERLINK"),
    Case("indicators/at_command.csv", "compare", 422, r"@SUM"),
    Case("indicators/nan_and_infinity.csv", "compare", 422, r"row=1.*lon|lon.*row=1"),
    Case("indicators/latitude_beyond_pole.csv", "compare", 422, r"91"),
    Case("indicators/huge_number.csv", "compare", 422, r"azimuth_deg"),
    Case("indicators/polygon_geometry.geojson", "compare", 422, r"must be a Point"),
]


def test_corpus_is_complete():
    """At least 40 cases (issue 8); every corpus file is used and every case has its file."""
    files = {str(p.relative_to(CORPUS)) for p in CORPUS.rglob("*")
             if p.is_file() and p.suffix != ".py" and "__pycache__" not in p.parts}
    used = {c.file for c in CASES}
    assert len(CASES) >= 40
    assert used - files == set(), "cases without a file"
    assert files - used == set(), "files without a case"
    kinds = {c.file.split("/")[0] for c in CASES}
    assert {"plates", "plate_files", "indicators", "faults", "queries", "predict", "urls",
            "bodies"} <= kinds


# -- fixtures ------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def service(tmp_path_factory, coarse_demo_model):
    """An app with the coarse fictional demo model stored, and its id."""
    from stressmap_api import create_app
    from stressmap_api.store import get_store

    data = tmp_path_factory.mktemp("hostile") / "data"
    app = create_app({"TESTING": True, "DATA_DIR": str(data), "JOB_EXECUTOR": "thread",
                      "JOB_WORKERS": 1, "LOAD_DEMO": False, "API_TOKEN": ""})
    with app.app_context():
        store = get_store()
        model_id = store_ready_model(store, coarse_demo_model)
    yield app, model_id
    app.extensions["stressmap_jobs"].shutdown()


def snapshot(app) -> tuple:
    """What a client or a later restart would see: the index listing, job rows, file digests."""
    import sqlite3

    from stressmap_api.store import get_store

    with app.app_context():
        store = get_store()
        listing = store.list_models()
        con = sqlite3.connect(store.db_path)
        try:
            jobs = con.execute("SELECT * FROM jobs ORDER BY id").fetchall()
        finally:
            con.close()
        files = {}
        for root in (store.models_dir, store.jobs_dir):
            for p in sorted(root.rglob("*")):
                if p.is_file():
                    files[str(p.relative_to(store.data_dir))] = hashlib.sha256(
                        p.read_bytes()).hexdigest()
    return listing, jobs, files


def _payload(case: Case) -> bytes:
    data = (CORPUS / case.file).read_bytes()
    if case.file.endswith(".gz") and case.target != "raw":
        data = gzip.decompress(data)
    return data


def _problem_text(body: dict) -> str:
    parts = [str(body.get("detail", ""))]
    for err in body.get("errors") or []:
        parts.append(" ".join(f"{k}={v}" for k, v in err.items()))
    return " | ".join(parts)


def _read_plate_file(path: Path):
    from stressmap.io.plate_files import load_plate_files

    if "params" in path.name:  # a good boundary (the corpus's fictional quadrilateral)
        boundary = path.with_name("boundary.geojson")
        good = json.loads(_payload(Case("plates/nested_description.json", "model", 0, "")))
        boundary.write_text(json.dumps(good["boundary"]), encoding="utf-8")
        return load_plate_files(boundary, path)
    return load_plate_files(path)


def _read_indicator_file(path: Path):
    from stressmap.io.indicators import read_indicators

    return read_indicators(path)


def _read_fault_file(path: Path):
    from stressmap.io.faults import read_fault_file

    return read_fault_file(path)


#: Files reached through a reader (CLI); the reader's error goes through the service's handlers.
READERS = {"plate_files": _read_plate_file, "indicators": _read_indicator_file,
           "faults": _read_fault_file}


def _send(app, model_id: str, case: Case, tmp_path: Path):
    """Send the case; returns (status, content_type, body bytes)."""
    client = app.test_client()
    data = _payload(case)
    if case.target in READERS:
        name = case.file.split("/")[-1].removesuffix(".gz")
        path = tmp_path / name
        path.write_bytes(data)
        try:
            READERS[case.target](path)
        except InputError as exc:
            with app.test_request_context("/api/v1/screen", method="POST"):
                resp = app.make_response(app.handle_user_exception(exc))
            return resp.status_code, resp.content_type, resp.get_data()
        raise AssertionError(f"{case.file}: the reader accepted a hostile file")
    if case.target == "model":
        resp = client.post("/api/v1/models", data=data, content_type=case.content_type,
                           headers=case.headers)
    elif case.target == "raw":
        resp = client.post("/api/v1/models", data=data, content_type=case.content_type,
                           headers=case.headers)
    elif case.target == "predict":
        resp = client.post(f"/api/v1/models/{model_id}/predict", data=data,
                           content_type=case.content_type, headers=case.headers)
    elif case.target == "compare":
        text = data.decode("utf-8")
        body = ({"indicators_csv": text} if case.file.endswith(".csv")
                else {"indicators": json.loads(text)})
        resp = client.post(f"/api/v1/models/{model_id}/compare", json=body)
    elif case.target == "screen":
        resp = client.post("/api/v1/screen", data=data, content_type=case.content_type)
    elif case.target == "field":
        query = data.decode("ascii").strip()
        resp = client.get(f"/api/v1/models/{model_id}/field?{query}")
    elif case.target == "url":
        method, _, url = data.decode("ascii").strip().partition(" ")
        url = url.replace("{model}", model_id).replace("{MODEL}", model_id.upper())
        resp = client.open(url, method=method)
    else:  # pragma: no cover - a typo in CASES
        raise ValueError(case.target)
    return resp.status_code, resp.content_type, resp.get_data()


@pytest.mark.parametrize("case", CASES, ids=str)
def test_hostile_input_gets_specific_problem(service, case, tmp_path):
    app, model_id = service
    before = snapshot(app)
    start = time.monotonic()
    with ThreadPoolExecutor(max_workers=1) as pool:
        future = pool.submit(_send, app, model_id, case, tmp_path)
        try:
            status, ctype, raw = future.result(timeout=TIME_LIMIT_S)
        except FutureTimeout:
            pytest.fail(f"{case.file}: no answer within {TIME_LIMIT_S} s")
    elapsed = time.monotonic() - start
    assert elapsed < TIME_LIMIT_S
    assert 400 <= status < 500, raw[:500]
    assert status == case.status, raw[:500]
    assert ctype.split(";")[0] == PROBLEM
    body = json.loads(raw)
    assert body["status"] == status and body["title"] and body["detail"]
    text = _problem_text(body)
    assert re.search(case.match, text, flags=re.IGNORECASE | re.DOTALL), text
    # Reader messages may repeat the path the user gave on the command line; nothing else.
    leaks = READER_LEAKS if case.target in READERS else LEAKS
    assert not leaks.search(raw.decode("utf-8")), raw[:500]
    assert snapshot(app) == before, "stored data changed"


def test_formula_text_is_neutralised_when_echoed_as_csv(service):
    """A point's echoed properties may carry formulas; CSV output must not let a spreadsheet run
    them (OWASP "CSV Injection": prefix cells starting with = + - @ with a quote)."""
    app, model_id = service
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [-15.0, -20.0]},
         "properties": {"well": '=HYPERLINK("http://example.invalid","x")', "note": "@SUM(A1)"}}]}
    resp = app.test_client().post(f"/api/v1/models/{model_id}/predict",
                                  json={"points": fc, "format": "csv"})
    assert resp.status_code == 200
    import csv
    import io

    rows = [r for r in csv.reader(io.StringIO(resp.get_data(as_text=True)))
            if r and not r[0].startswith("#")]
    cells = [c for r in rows for c in r]
    assert not any(c[:1] in ("=", "+", "@") for c in cells), cells
    assert any("HYPERLINK" in c for c in cells)

    csv_text = ("id,lon,lat,type,azimuth_deg,quality\n"
                '"=HYPERLINK(""http://example.invalid"")",-15,-20,breakout,30,A\n')
    resp = app.test_client().post(f"/api/v1/models/{model_id}/compare",
                                  json={"indicators_csv": csv_text, "format": "csv"})
    assert resp.status_code == 200, resp.get_data(as_text=True)
    rows = [r for r in csv.reader(io.StringIO(resp.get_data(as_text=True)))
            if r and not r[0].startswith("#")]
    cells = [c for r in rows for c in r]
    assert not any(c[:1] in ("=", "+", "@") for c in cells), cells
    assert any("HYPERLINK" in c for c in cells)


def test_store_is_still_usable_after_the_corpus(service):
    """After every hostile request the stored demo model still answers a normal prediction."""
    app, model_id = service
    resp = app.test_client().post(f"/api/v1/models/{model_id}/predict",
                                  json={"points": [[-15.0, -20.0]]})
    assert resp.status_code == 200
    assert resp.get_json()["features"][0]["properties"]["inside"] is True


def test_corpus_generator_is_reproducible(tmp_path):
    """The committed files are what make_corpus.py writes (nobody edited one by hand)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_corpus", CORPUS / "make_corpus.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    shutil.copy(CORPUS / "make_corpus.py", tmp_path / "make_corpus.py")
    mod.HERE = tmp_path
    mod.main()
    for case in CASES:
        assert (tmp_path / case.file).read_bytes() == (CORPUS / case.file).read_bytes(), case.file


@pytest.mark.parametrize("request_args", [
    ("POST", "/predict", {"points": [[180.0, 90.0], [-180.0, -90.0], [0.0, 90.0], [360.0, 0.0],
                                     [-360.0, 0.0]]}),
    ("POST", "/predict", {"region": {"bbox": [170, -10, -170, 10], "spacing_km": 200}}),
    ("POST", "/predict", {"region": {"bbox": [-180, 80, 180, 90], "spacing_km": 500}}),
    ("GET", "/field?bbox=179,-89,-179,89&spacing_km=1000", None),
], ids=["poles-and-wrapped-longitudes", "bbox-across-antimeridian", "polar-cap", "field-antimeridian"])
def test_valid_requests_at_poles_and_antimeridian_are_answered(service, request_args):
    """Edge geometry that is valid (poles, longitudes of +-180/360, boxes across the
    antimeridian) is answered with 200 and points outside the plate flagged, never a 5xx."""
    app, model_id = service
    method, suffix, body = request_args
    resp = app.test_client().open(f"/api/v1/models/{model_id}{suffix}", method=method, json=body)
    assert resp.status_code == 200, resp.get_data(as_text=True)[:500]
    fc = resp.get_json()
    assert fc["type"] == "FeatureCollection"
    if suffix == "/predict" and "points" in body:
        assert [f["properties"]["inside"] for f in fc["features"]] == [False] * 5
