"""Network directories: the built plates of a network, cached by the content of their documents.

Layout of a network directory::

    network.json         the network document as given (lines, defaults, plates)
    index.json           {"name", "plates": {plate name: {"key", "area_km2", "neighbours"}},
                          "built": [plate names whose model is present]}
    plates/<key>/        one model directory per built plate (as ``stressmap build`` writes)

``key`` is the sha256 of the plate's derived document (parameters included) and of the
stressmap version, so a plate is rebuilt only when its own document changes: editing one line
rebuilds the two plates on either side of it, and a plate whose document comes back unchanged
reuses its model. Plates build in a process pool; every write is atomic (a new model directory
appears whole or not at all, index.json is replaced in one rename), so a failed or interrupted
build never damages what was there.
"""

from __future__ import annotations

import json
import os
import uuid
from concurrent.futures import ProcessPoolExecutor, as_completed
from pathlib import Path

from stressmap import __version__
from stressmap.errors import (
    InputError,
    ModelValidationError,
    NotFoundError,
    StorageError,
    problem,
)
from stressmap.io.modeldir import MODEL_FILES, fsync_dir, read_model, write_model
from stressmap.model.build import build_model
from stressmap.model.network import check_network, document_key, plate_documents
from stressmap.model.network_predict import merge_plates
from stressmap.model.plate import parse_plate

__all__ = ["derive", "build_network", "prepare_network", "read_network", "is_network_dir", "load_plates",
           "read_network_model", "read_any_model", "NETWORK_FILES"]

NETWORK_FILES = ("network.json", "index.json")


def is_network_dir(path) -> bool:
    """True when ``path`` is a directory written by :func:`build_network`."""
    p = Path(path)
    return p.is_dir() and all((p / f).is_file() for f in NETWORK_FILES)


def derive(document: dict) -> tuple:
    """Check a network and derive its plates: (network, {name: plate document}, {name: key}).

    Every derived plate document is checked too, so a bad force parameter on a line is
    reported with the line's position in the network (``lines.features[i]...``).
    """
    net = check_network(document)
    docs = plate_documents(net)
    probs = []
    for name, doc in docs.items():
        try:
            parse_plate(doc)
        except ModelValidationError as exc:
            feats = doc["boundary"]["features"]
            for p in exc.problems:
                field = str(p.get("field") or "")
                line = None
                if field.startswith("boundary.features["):
                    k = int(field[len("boundary.features["):].split("]")[0])
                    line = feats[k]["properties"].get("line") if k < len(feats) else None
                if line is not None:
                    rest = field.split("]", 1)[1]
                    field = f"lines.features[{line}]{rest}"
                elif field in ("", "boundary"):
                    field = f"plates.{name}"
                elif not field.startswith("lines."):
                    field = f"plates.{name}.{field}"
                probs.append(problem(f"plate {name!r}: {p['message']}", field=field))
    if probs:
        raise ModelValidationError(f"invalid network: {len(probs)} problem"
                                   f"{'s' if len(probs) != 1 else ''} in its plates", probs)
    keys = {name: document_key(doc, salt=f"stressmap {__version__}\n") for name, doc in docs.items()}
    return net, docs, keys


def _build_one(doc: dict, target: str) -> str:
    """Worker: build one plate and write it to ``target`` (runs in a child process)."""
    write_model(build_model(doc), target)
    return target


def _write_index(directory: Path, index: dict) -> None:
    tmp = directory / f".index.json.tmp-{uuid.uuid4().hex}"
    tmp.write_text(json.dumps(index, indent=1, sort_keys=True), encoding="utf-8")
    with tmp.open("rb+") as fh:
        os.fsync(fh.fileno())
    os.replace(tmp, directory / "index.json")
    fsync_dir(directory)


def _index(net, docs: dict, keys: dict, directory: Path) -> dict:
    plates = {}
    for face in net.faces:
        if face.name is None:
            continue
        feats = docs[face.name]["boundary"]["features"]
        neighbours = sorted({f["properties"]["neighbour"] for f in feats
                             if f["properties"]["neighbour"] is not None})
        plates[face.name] = {"key": keys[face.name], "area_km2": face.area_km2,
                             "neighbours": neighbours}
    built = sorted(n for n, v in plates.items() if _present(directory, v["key"]))
    return {"name": net.name, "plates": plates, "built": built}


def _present(directory: Path, key: str) -> bool:
    d = directory / "plates" / key
    return all((d / f).is_file() for f in MODEL_FILES)


def build_network(document: dict, directory, plates=None, workers: int | None = None,
                  progress=None) -> dict:
    """Build the plates of a network that are not already built; returns a report.

    Parameters
    ----------
    document : dict
        Network document.
    directory : path
        Network directory (created when missing). Built plates found there are reused.
    plates : list of str, optional
        Build only these plates (default: all).
    workers : int, optional
        Processes of the pool (default: CPU count, at most the plates to build).
    progress : callable, optional
        ``progress(fraction, message)``, one call per finished plate.

    Returns
    -------
    dict
        ``{"built": [...], "reused": [...], "keys": {name: key}, "directory": str}``.
    """
    net, docs, keys = derive(document)
    wanted = list(docs) if not plates else list(dict.fromkeys(plates))
    unknown = [p for p in wanted if p not in docs]
    if unknown:
        raise InputError("unknown plate name", [problem(
            f"no plate named {p!r}; the network's plates are {', '.join(sorted(docs))}",
            field="--plate") for p in unknown])
    out = Path(directory)
    try:
        (out / "plates").mkdir(parents=True, exist_ok=True)
        todo = [n for n in wanted if not _present(out, keys[n])]
        reused = [n for n in wanted if n not in todo]
        _build_pool(todo, docs, keys, out, workers, progress)
        _write_document(out, document)
        _write_index(out, _index(net, docs, keys, out))
    except OSError as exc:
        raise StorageError(f"could not write the network directory {out.name}: "
                           f"{exc.strerror or exc}") from exc
    return {"built": todo, "reused": reused, "keys": {n: keys[n] for n in wanted},
            "directory": str(out)}


def prepare_network(document: dict, directory) -> dict:
    """Check a network and write its directory without building any plate; returns the index.

    Raises the network's :class:`ModelValidationError` before anything is written.
    """
    net, docs, keys = derive(document)
    out = Path(directory)
    try:
        (out / "plates").mkdir(parents=True, exist_ok=True)
        _write_document(out, document)
        index = _index(net, docs, keys, out)
        _write_index(out, index)
    except OSError as exc:
        raise StorageError(f"could not write the network directory {out.name}: "
                           f"{exc.strerror or exc}") from exc
    return index


def _write_document(out: Path, document: dict) -> None:
    tmp = out / f".network.json.tmp-{uuid.uuid4().hex}"
    tmp.write_text(json.dumps(document, sort_keys=True), encoding="utf-8")
    os.replace(tmp, out / "network.json")


def _build_pool(todo: list, docs: dict, keys: dict, out: Path, workers, progress) -> None:
    if not todo:
        if progress is not None:
            progress(1.0, "all plates already built")
        return
    # largest plates first, so the long builds start at once; progress weighted by area
    cost = {n: sum(len(f["geometry"]["coordinates"]) for f in docs[n]["boundary"]["features"])
            for n in todo}
    order = sorted(todo, key=lambda n: -cost[n])
    n_workers = max(1, min(workers or os.cpu_count() or 1, len(order)))
    if n_workers == 1:
        for k, name in enumerate(order):
            _build_one(docs[name], str(out / "plates" / keys[name]))
            if progress is not None:
                progress((k + 1) / len(order), f"built {name}")
        return
    with ProcessPoolExecutor(max_workers=n_workers) as pool:
        futures = {pool.submit(_build_one, docs[n], str(out / "plates" / keys[n])): n for n in order}
        for k, fut in enumerate(as_completed(futures)):
            fut.result()  # a failed plate raises here; plates already written stay valid
            if progress is not None:
                progress((k + 1) / len(order), f"built {futures[fut]}")


def read_network(directory) -> dict:
    """The index of a network directory (see the module docstring)."""
    p = Path(directory)
    if not is_network_dir(p):
        raise NotFoundError(f"no network directory at {p} (it needs {', '.join(NETWORK_FILES)})")
    try:
        return json.loads((p / "index.json").read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise StorageError(f"network directory {p.name} cannot be read: {exc}") from exc


def load_plates(directory, names=None) -> dict:
    """Built plates ``{name: BuiltModel}`` of a network directory (all built ones by default)."""
    p = Path(directory)
    index = read_network(p)
    names = index["built"] if names is None else names
    missing = [n for n in names if n not in index["built"]]
    if missing:
        raise InputError("plates not built", [problem(
            f"plate {n!r} is not built in {p.name}; run `stressmap network build`", field="plate")
            for n in missing])
    return {n: read_model(p / "plates" / index["plates"][n]["key"]) for n in names}


def read_network_model(directory, names=None):
    """The built plates of a network directory joined into one model (see
    :func:`stressmap.model.network_predict.merge_plates`)."""
    index = read_network(directory)
    return merge_plates(load_plates(directory, names), name=index.get("name") or Path(directory).name)


def read_any_model(directory):
    """A model directory (``stressmap build``) or a network directory (``stressmap network
    build``) as one model."""
    return read_network_model(directory) if is_network_dir(directory) else read_model(directory)
