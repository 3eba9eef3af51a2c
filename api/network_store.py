"""Stored networks: one network directory per uploaded network, under ``<DATA_DIR>/networks``.

Each ``networks/<id>/`` is a network directory (:mod:`stressmap.io.networkdir`: the document,
its index and the built plates cached by content) plus ``meta.json`` (id, name, created time,
the job building its plates). A network is written whole in a temporary folder and renamed into
place, so a failed upload leaves nothing behind; plates are added by build jobs, each atomically.
Loaded networks (their built plates joined into one model) are kept in a small LRU cache keyed
by the set of built plates, so a finished build is picked up at once.
"""

from __future__ import annotations

import json
import os
import shutil
import threading
import uuid
from collections import OrderedDict
from pathlib import Path

from flask import current_app
from stressmap_api.store import check_id, new_id, utc_now

from stressmap.errors import NotFoundError, StorageError
from stressmap.io.networkdir import (
    build_network,
    prepare_network,
    read_network,
    read_network_model,
)

__all__ = ["NetworkStore", "get_network_store", "build_network_job"]

_EXTENSION = "stressmap_networks"


class NetworkStore:
    """Networks on disk (see the module docstring)."""

    def __init__(self, data_dir, cache_size: int = 4):
        self.root = Path(data_dir).resolve() / "networks"
        try:
            self.root.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StorageError(f"cannot create the data directory's 'networks' folder: "
                               f"{exc.strerror or type(exc).__name__}") from exc
        self._cache: OrderedDict = OrderedDict()
        self._cache_size = max(int(cache_size), 1)
        self._lock = threading.Lock()

    def path(self, network_id: str) -> Path:
        return self.root / check_id(network_id, "network")

    def add(self, document: dict) -> str:
        """Check and store a network (no plate built yet); its id. Nothing is kept on error."""
        network_id = new_id()
        tmp = self.root / f".{network_id}.tmp-{uuid.uuid4().hex}"
        try:
            index = prepare_network(document, tmp)  # raises ModelValidationError first
            self._write_meta(tmp, {"id": network_id, "name": index["name"], "created": utc_now(),
                                   "build_job": None})
            os.rename(tmp, self.root / network_id)
        except BaseException:
            shutil.rmtree(tmp, ignore_errors=True)
            raise
        return network_id

    @staticmethod
    def _write_meta(directory: Path, meta: dict) -> None:
        tmp = directory / f".meta.json.tmp-{uuid.uuid4().hex}"
        tmp.write_text(json.dumps(meta, sort_keys=True), encoding="utf-8")
        os.replace(tmp, directory / "meta.json")

    def meta(self, network_id: str) -> dict:
        """Public description: id, name, created, plates (with built flags), status, build job."""
        d = self.path(network_id)
        try:
            meta = json.loads((d / "meta.json").read_text(encoding="utf-8"))
            index = read_network(d)
        except (FileNotFoundError, NotFoundError):
            raise NotFoundError(f"no network with id {network_id!r}") from None
        except (OSError, ValueError) as exc:
            raise StorageError(f"network {network_id} cannot be read: {exc}") from exc
        built = set(index["built"])
        plates = [{"name": n, "area_km2": v["area_km2"], "neighbours": v["neighbours"],
                   "built": n in built} for n, v in index["plates"].items()]
        meta.update({"plates": plates, "status": "ready" if len(built) == len(plates) else "pending",
                     "build_time": meta.get("created")})
        return meta

    def set_build_job(self, network_id: str, job_id: str) -> None:
        d = self.path(network_id)
        with self._lock:
            meta = json.loads((d / "meta.json").read_text(encoding="utf-8"))
            meta["build_job"] = job_id
            self._write_meta(d, meta)

    def list(self) -> list[dict]:
        out = []
        for d in sorted(self.root.iterdir()):
            if d.name.startswith(".") or not (d / "meta.json").is_file():
                continue
            try:
                m = self.meta(d.name)
            except (NotFoundError, StorageError):
                continue
            out.append({k: m[k] for k in ("id", "name", "created", "status")}
                       | {"plates": len(m["plates"])})
        return sorted(out, key=lambda m: m["created"], reverse=True)

    def delete(self, network_id: str) -> None:
        d = self.path(network_id)
        if not (d / "meta.json").is_file():
            raise NotFoundError(f"no network with id {network_id!r}")
        gone = self.root / f".{network_id}.deleted-{uuid.uuid4().hex}"
        os.rename(d, gone)
        shutil.rmtree(gone, ignore_errors=True)
        with self._lock:
            for key in [k for k in self._cache if k[0] == network_id]:
                self._cache.pop(key)

    def load(self, network_id: str):
        """The built plates of a network joined into one model (cached)."""
        d = self.path(network_id)
        index = read_network(d)
        key = (network_id, tuple(sorted(index["plates"][n]["key"] for n in index["built"])))
        with self._lock:
            if key in self._cache:
                self._cache.move_to_end(key)
                return self._cache[key]
        model = read_network_model(d)
        with self._lock:
            self._cache[key] = model
            while len(self._cache) > self._cache_size:
                self._cache.popitem(last=False)
        return model


def build_network_job(data_dir: str, network_id: str, *, progress) -> dict:
    """Job body: build every plate of a stored network that is not built yet."""
    d = Path(data_dir).resolve() / "networks" / check_id(network_id, "network")
    document = json.loads((d / "network.json").read_text(encoding="utf-8"))
    report = build_network(document, d, workers=1, progress=progress)
    return {"network_id": network_id, "built": report["built"], "reused": report["reused"]}


def init_app(app) -> NetworkStore:
    store = NetworkStore(app.config["DATA_DIR"], int(app.config.get("MODEL_CACHE_SIZE") or 4))
    app.extensions[_EXTENSION] = store
    return store


def get_network_store() -> NetworkStore:
    return current_app.extensions[_EXTENSION]
