"""The repository stands on its own: no code, test or document refers to files outside it.

Everything a user or maintainer needs is in README.md and DEVELOPERS.md, so every Markdown file a
line names must be one of the repository's own, no relative path may climb out of the checkout,
and no line may name a folder of a developer's machine.
"""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
MARKDOWN = re.compile(r"(?<![\w/.-])([\w-]+\.md)\b")
CLIMB = re.compile(r"(?<![\w.])(?:\.\./)+[\w.-][\w./-]*")
MACHINE = re.compile(r"(?<![\w.])/(?:work|home|root|Users)/[\w.-]")


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


def outside_references(name: str, line: str, own_markdown: set[str]) -> list[str]:
    """What in one line of the tracked file ``name`` points outside the repository."""
    found = [m for m in MARKDOWN.findall(line) if m not in own_markdown]
    for ref in CLIMB.findall(line):
        target = (REPO / name).parent.joinpath(ref).resolve()
        if not target.is_relative_to(REPO):
            found.append(ref)
    return found + MACHINE.findall(line)


def test_nothing_refers_to_files_outside_the_repository():
    files = dict(_tracked_text_files())
    own_markdown = {Path(n).name for n in files if n.endswith(".md")}
    me = Path(__file__).resolve().relative_to(REPO).as_posix()  # its examples are on purpose
    hits = [f"{name}:{n}: {line.strip()}"
            for name, text in files.items() if name != me
            for n, line in enumerate(text.splitlines(), 1)
            if outside_references(name, line, own_markdown)]
    assert not hits, "\n".join(hits)


def test_the_check_sees_an_outside_reference():
    own = {"README.md", "DEVELOPERS.md"}
    assert outside_references("stressmap/x.py", "see NOTES.md", own) == ["NOTES.md"]
    assert outside_references("stressmap/x.py", "open ../../../elsewhere/a.txt", own)
    assert outside_references("README.md", "/home/me/plate.json", own)
    assert outside_references("benchmarks/README.md", "see ../DEVELOPERS.md, POST .../predict",
                              own) == []
