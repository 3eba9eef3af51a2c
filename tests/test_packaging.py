"""A fresh `pip install` is quiet: the packaging metadata gives setuptools nothing to warn about.

setuptools (>= 77) warns when the licence is a TOML table instead of an SPDX expression string
(PEP 639) and when a folder with files is installed without being declared as a package
("Package would be ignored"); both are checked here from pyproject.toml itself, so the test is
fast. `pip wheel -v .` on a fresh checkout shows the same (no warnings from setuptools).
"""

from __future__ import annotations

import tomllib
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))


def _folders_with_files(root: Path, import_name: str) -> set[str]:
    out = set()
    for folder in [root, *sorted(p for p in root.rglob("*") if p.is_dir())]:
        rel = folder.relative_to(root)
        if "__pycache__" in rel.parts or any(part.startswith(".") for part in rel.parts):
            continue
        if any(f.is_file() for f in folder.iterdir()):
            out.add(".".join([import_name, *rel.parts]))
    return out


def test_every_folder_that_ships_files_is_a_declared_package():
    setup = PYPROJECT["tool"]["setuptools"]
    declared = set(setup["packages"])
    dirs = setup["package-dir"]
    found = set()
    for import_name, folder in dirs.items():
        found |= _folders_with_files(REPO / folder, import_name)
    assert found == declared, {"undeclared": found - declared, "missing": declared - found}


def test_licence_is_an_spdx_expression_without_licence_classifiers():
    project = PYPROJECT["project"]
    assert isinstance(project["license"], str)  # PEP 639; a table is deprecated
    assert not any(c.startswith("License ::") for c in project.get("classifiers", []))
    build = PYPROJECT["build-system"]["requires"]
    assert any(r.replace(" ", "").startswith("setuptools>=77") for r in build)  # PEP 639 support


def test_make_installs_quietly():
    """`make test`/`make serve` bootstrap .venv with an editable install, for which setuptools
    always emits an informational "Editable installation." warning (its meta-path finder for
    api/ -> stressmap_api); the Makefile filters exactly that message and nothing else."""
    makefile = (REPO / "Makefile").read_text(encoding="utf-8")
    (line,) = [ln for ln in makefile.splitlines() if "pip install" in ln and "-e" in ln]
    assert "--quiet" in line
    assert 'PYTHONWARNINGS="ignore:Editable installation"' in line
