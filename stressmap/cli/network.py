"""``stressmap network check|plates|build``: plates found from a typed boundary network.

NET is a lines file (GeoJSON or GeoPackage of LineStrings, or a whole network document as JSON)
with an optional ``--params`` file (TOML/JSON: ``name``, ``description``, ``defaults``,
``plates``). A network directory written by ``build`` is accepted by ``predict``, ``compare``,
``calibrate``, ``ensemble`` and ``screen`` wherever they take a model directory.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from stressmap.cli._progress import progress_bar
from stressmap.errors import InputError, problem
from stressmap.formats.network_geojson import plates_geojson
from stressmap.io.network_files import load_network_files
from stressmap.io.networkdir import build_network, derive

__all__ = ["register"]


def _load(args) -> dict:
    if not Path(args.network).is_file():
        raise InputError(f"network file not found: {args.network}",
                         [problem("file not found", field="NET")])
    return load_network_files(args.network, args.params)


def _cmd_check(args) -> int:
    net, docs, _ = derive(_load(args))
    total = sum(f.area_km2 for f in net.faces)
    print(f"network {net.name!r}: {len(net.edges)} line pieces, {len(net.nodes_xyz)} junctions and "
          f"ends, {len(docs)} plates" + (", open (regional, bounded by free lines)"
                                          if net.outside is not None else ", closed (whole sphere)"))
    for face in net.faces:
        if face.name is not None:
            print(f"  {face.name:<24} {face.area_km2:>14,.0f} km^2  "
                  f"{len(docs[face.name]['boundary']['features']):>3} segments")
    print(f"  faces cover {total:,.0f} km^2 (the sphere: {4 * np.pi * 6371.0**2:,.0f} km^2)")
    return 0


def _cmd_plates(args) -> int:
    net, docs, keys = derive(_load(args))
    out = Path(args.output)
    out.write_text(json.dumps(plates_geojson(net, docs, keys)), encoding="utf-8")
    if args.documents:
        folder = Path(args.documents)
        folder.mkdir(parents=True, exist_ok=True)
        for name, doc in docs.items():
            safe = "".join(c if c.isalnum() or c in "-_" else "_" for c in name)
            (folder / f"{safe}.json").write_text(json.dumps(doc, indent=1), encoding="utf-8")
    print(f"{len(docs)} plates of {net.name!r} -> {out}"
          + (f" (plate documents in {args.documents})" if args.documents else ""))
    return 0


def _cmd_build(args) -> int:
    document = _load(args)
    bar, update = progress_bar("network build")
    try:
        report = build_network(document, args.output, plates=args.plate, workers=args.workers,
                               progress=update)
    finally:
        bar.close()
    print(f"built {len(report['built'])} plate(s), reused {len(report['reused'])} -> {args.output}")
    for name in report["built"]:
        print(f"  built  {name}")
    for name in report["reused"]:
        print(f"  reused {name}")
    return 0


def register(sub) -> None:
    p = sub.add_parser("network", help="plates from a typed boundary network: check, derive, build",
                       description="Find the plates of a network of typed plate-boundary lines, "
                                   "check it, write the derived plates, build them (cached by "
                                   "content, in parallel).")
    cmds = p.add_subparsers(dest="network_command", metavar="ACTION")

    def common(q):
        q.add_argument("network", metavar="NET", help="lines file (.geojson/.gpkg) or network "
                       "document (.json)")
        q.add_argument("--params", metavar="FILE", help="parameter file (.toml/.json): name, "
                       "description, defaults, plates")

    c = cmds.add_parser("check", help="check the network and list its plates",
                        description="Report every problem of the network at once (dangling ends, "
                                    "near-misses, crossings, faces with two names or none), or "
                                    "list its plates.")
    common(c)
    c.set_defaults(handler=_cmd_check)
    q = cmds.add_parser("plates", help="write the derived plates as GeoJSON polygons",
                        description="Write the plates of the network as a GeoJSON FeatureCollection "
                                    "of Polygons (and, with --documents, one plate model document "
                                    "per plate).")
    common(q)
    q.add_argument("-o", "--output", required=True, metavar="FILE", help="GeoJSON file to write")
    q.add_argument("--documents", metavar="DIR", help="also write each plate's document here")
    q.set_defaults(handler=_cmd_plates)
    b = cmds.add_parser("build", help="build the plates (only those whose document changed)",
                        description="Build the plates of the network into a network directory. A "
                                    "plate already built from the same document is reused.")
    common(b)
    b.add_argument("--plate", action="append", metavar="NAME", help="build only this plate "
                   "(repeat for more)")
    b.add_argument("--workers", type=int, metavar="N", help="processes (default: CPU count)")
    b.add_argument("-o", "--output", required=True, metavar="DIR", help="network directory")
    b.set_defaults(handler=_cmd_build)
    p.set_defaults(handler=lambda args: (p.print_help(), 1)[1])
