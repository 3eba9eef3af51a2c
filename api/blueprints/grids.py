"""Grids: upload an elevation, crustal-thickness or age grid as its own resource; list, describe,
delete. Plate documents name an uploaded grid by its id (see :mod:`stressmap_api.grids`)."""

from __future__ import annotations

from flask import Blueprint, current_app, jsonify, request, url_for
from stressmap_api.auth import require_token
from stressmap_api.grids import DEFAULT_MAX_GRID_CELLS, GridStore
from stressmap_api.guards import accepts
from stressmap_api.store import get_store

from stressmap.errors import InputError, problem
from stressmap.formats.grids import ROLES

__all__ = ["bp"]

bp = Blueprint("grids", __name__)


def _grids() -> GridStore:
    return GridStore(get_store().data_dir)


def _with_links(meta: dict) -> dict:
    return {**meta, "links": {"self": url_for("grids.get_grid", grid_id=meta["id"])}}


def _upload_bytes() -> bytes:
    """The grid file: the raw request body, or the multipart part named ``file``."""
    if request.mimetype == "multipart/form-data":
        part = request.files.get("file")
        if part is None:
            raise InputError("no grid file in the form", [problem(
                "send the grid as the form part 'file' or as the raw request body", field="file")])
        data = part.read()
    else:
        data = request.get_data(cache=False)
    if not data:
        raise InputError("empty upload", [problem("the request body holds no grid file",
                                                  field="(body)")])
    return data


def _text_arg(name: str, limit: int = 200) -> str | None:
    value = request.args.get(name)
    if value is not None and (len(value) > limit or not value.strip()):
        raise InputError(f"bad {name}", [problem(f"must be a non-empty text of at most {limit} "
                                                 "characters", field=name)])
    return value


@bp.post("/grids")
@accepts("application/x-netcdf", "application/netcdf", "application/octet-stream", "image/tiff",
         "multipart/form-data")
@require_token
def upload_grid():
    role = request.args.get("role")
    if role not in ROLES:
        raise InputError("unknown or missing grid role",
                         [problem(f"role must be one of {', '.join(ROLES)}", field="role")])
    data = _upload_bytes()
    max_cells = int(current_app.config.get("MAX_GRID_CELLS") or DEFAULT_MAX_GRID_CELLS)
    meta, created = _grids().add(data, role, variable=_text_arg("variable"),
                                 units=_text_arg("units") or "", name=_text_arg("name") or "",
                                 max_cells=max_cells)
    resp = jsonify(_with_links(meta))
    resp.status_code = 201 if created else 200
    resp.headers["Location"] = url_for("grids.get_grid", grid_id=meta["id"])
    return resp


@bp.get("/grids")
def list_grids():
    return jsonify({"grids": [_with_links(m) for m in _grids().list()]})


@bp.get("/grids/<grid_id>")
def get_grid(grid_id: str):
    return jsonify(_with_links(_grids().meta(grid_id)))


@bp.delete("/grids/<grid_id>")
@require_token
def delete_grid(grid_id: str):
    _grids().delete(grid_id)
    return "", 204
