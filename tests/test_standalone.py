"""The repository stands on its own: no code, test or document refers to files outside it
(design notes, other checkouts, a developer's home). Everything needed is in README.md and
DEVELOPERS.md."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
OUTSIDE = re.compile(r"\bDESIGN\.md\b|\bSTYLE\.md\b|/work/|\.\./shared/|/shared/[A-Z]")


def _tracked_text_files():
    try:
        names = subprocess.run(["git", "ls-files"], cwd=REPO, capture_output=True, text=True,
                               check=True).stdout.splitlines()
    except (OSError, subprocess.CalledProcessError):  # an unpacked archive: walk the tree
        names = [str(p.relative_to(REPO)) for p in REPO.rglob("*") if p.is_file()
                 and not any(part.startswith(".") or part.endswith(".egg-info")
                             for part in p.relative_to(REPO).parts)]
    for name in names:
        path = REPO / name
        if path.suffix in {".png", ".gpkg", ".nc", ".shp", ".dbf", ".shx"} or not path.is_file():
            continue
        try:
            yield name, path.read_text(encoding="utf-8")
        except UnicodeDecodeError:
            continue


def test_nothing_refers_to_files_outside_the_repository():
    me = Path(__file__).resolve().relative_to(REPO).as_posix()
    hits = [f"{name}:{n}: {line.strip()}"
            for name, text in _tracked_text_files() if name != me
            for n, line in enumerate(text.splitlines(), 1) if OUTSIDE.search(line)]
    assert not hits, "\n".join(hits)
