"""The layer rule of the package, read from the source (AST) and enforced.

Layers, lowest first (see stressmap/__init__.py and DEVELOPERS.md):

    base      constants, errors, validate          plain values, the error tree, the one validator
    geo       sphere, tensor, circular stats, focal geometry, the lon/lat grid
    physics   cooling models, force laws, column GPE
    fem       mesh, thin sheet, loads
    model     plate/network documents, build stages, the built model, prediction
    analyses  indicators, comparison, calibration, ensembles, screening, wells
    --------- the core ends here: pure functions of arrays, no files, no HTTP ---------
    formats   text/bytes <-> tables and datasets (no paths)
    io        paths and files
    plot      pictures
    cli, data edges (terminal, demo generators)
    api       the service (stressmap_api)

A module may import its own layer and any lower layer. The core (base .. analyses) never imports
an edge layer, flask, the service, or opens files. The checker below is the one used on the package;
the tests at the end feed it a core module that imports an edge module and show it fails.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

LAYERS = ["base", "geo", "physics", "fem", "model", "analyses", "formats", "io", "plot", "cli", "api"]
CORE = set(LAYERS[: LAYERS.index("analyses") + 1])
#: Third-party packages the core must never import (HTTP belongs to the service).
CORE_FORBIDDEN_PACKAGES = {"flask", "werkzeug", "waitress", "matplotlib", "stressmap_api"}
#: Calls that open files; the core takes arrays and documents, never paths.
FILE_OPENERS = {"open", "open_dataset", "open_dataarray", "open_mfdataset", "read_file", "read_csv",
                "read_text", "read_bytes", "write_text", "write_bytes", "to_netcdf", "read_dataframe"}


def layer_of(module: str) -> str | None:
    """Layer of a dotted module name of this project, or None for outside modules."""
    parts = module.split(".")
    if parts[0] == "stressmap_api":
        return "api"
    if parts[0] != "stressmap":
        return None
    if len(parts) == 1 or parts[1] in ("constants", "errors", "validate"):
        return "base"
    if parts[1] == "data":
        return "cli"
    return parts[1] if parts[1] in LAYERS else "base"


def module_name(path: Path) -> str:
    rel = path.relative_to(ROOT).with_suffix("")
    parts = list(rel.parts)
    if parts[0] == "api":
        parts[0] = "stressmap_api"
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def imported_modules(tree: ast.AST) -> list[tuple[int, str]]:
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
            found.append((node.lineno, node.module))
            # `from stressmap import plot` names a subpackage, not only an attribute
            found += [(node.lineno, f"{node.module}.{a.name}") for a in node.names
                      if node.module in ("stressmap", "stressmap_api")]
    return found


def violations(module: str, source: str) -> list[str]:
    """Every breach of the layer rule in one module's source, as readable lines."""
    own = layer_of(module)
    tree = ast.parse(source)
    out = []
    for line, target in imported_modules(tree):
        top = target.split(".")[0]
        other = layer_of(target)
        if own in CORE and top in CORE_FORBIDDEN_PACKAGES:
            out.append(f"{module}:{line} core module imports {target}")
        elif other is not None and other != own and own != "api":
            if own in CORE and other not in CORE:
                out.append(f"{module}:{line} core layer {own!r} imports edge module {target} ({other})")
            elif own in CORE and LAYERS.index(other) > LAYERS.index(own):
                out.append(f"{module}:{line} layer {own!r} imports higher layer {target} ({other})")
            elif own in ("formats", "io", "plot") and other in ("cli", "api"):
                out.append(f"{module}:{line} edge {own!r} imports {target} ({other})")
            elif own in ("formats",) and other in ("io", "plot"):
                out.append(f"{module}:{line} formats (no paths) imports {target} ({other})")
    if own in CORE:
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                fn = node.func
                name = fn.id if isinstance(fn, ast.Name) else fn.attr if isinstance(fn, ast.Attribute) else None
                if name in FILE_OPENERS and not _reads_package_data(fn):
                    out.append(f"{module}:{node.lineno} core module opens a file ({name})")
    return out


def _reads_package_data(fn) -> bool:
    """``importlib.resources.files(...)...read_text()``: data shipped in the package, not a user file."""
    node = fn
    while isinstance(node, (ast.Attribute, ast.Call)):
        node = node.func if isinstance(node, ast.Call) else node.value
        if isinstance(node, ast.Call) and getattr(node.func, "attr", getattr(node.func, "id", "")) == "files":
            return True
    return False


def project_modules():
    for folder in ("stressmap", "api"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            yield module_name(path), path


def test_every_module_keeps_the_layer_rule():
    problems = []
    for module, path in project_modules():
        problems += violations(module, path.read_text(encoding="utf-8"))
    assert not problems, "layer rule broken:\n" + "\n".join(problems)


def test_every_stressmap_subpackage_has_a_layer():
    for sub in sorted(p.name for p in (ROOT / "stressmap").iterdir()
                      if p.is_dir() and (p / "__init__.py").exists()):
        assert layer_of(f"stressmap.{sub}") in LAYERS, sub


# -- the checker itself fails where it must -------------------------------------------------

@pytest.mark.parametrize("module, source", [
    ("stressmap.model.build", "from stressmap.io.modeldir import write_model\n"),
    ("stressmap.analyses.compare", "from stressmap.formats import export\n"),
    ("stressmap.analyses.compare", "from stressmap import plot\n"),
    ("stressmap.fem.sheet", "import flask\n"),
    ("stressmap.geo.sphere", "from stressmap.model import build_model\n"),
    ("stressmap.physics.forces", "from stressmap.fem.mesh import mesh_plate\n"),
    ("stressmap.model.plate", "import stressmap_api.store\n"),
    ("stressmap.physics.thermal", "def f(p):\n    with open(p) as fh:\n        return fh.read()\n"),
    ("stressmap.formats.export", "from stressmap.io.modeldir import read_model\n"),
    ("stressmap.plot.maps", "from stressmap.cli import main\n"),
])
def test_checker_refuses_an_upward_import(module, source):
    assert violations(module, source), f"{module} importing {source!r} must be refused"


@pytest.mark.parametrize("module, source", [
    ("stressmap.model.build", "from stressmap.fem import sheet\nfrom stressmap.geo.tensor import describe\n"),
    ("stressmap.analyses.compare", "from stressmap.model import predict_points\n"),
    ("stressmap.io.modeldir", "from stressmap.formats import export\nfrom stressmap.model import BuiltModel\n"),
    ("stressmap.cli.model", "from stressmap.io.modeldir import read_model\nimport stressmap_api\n"),
    ("stressmap_api.render", "from stressmap.plot.maps import shmax_map\n"),
])
def test_checker_accepts_a_downward_import(module, source):
    assert violations(module, source) == []
