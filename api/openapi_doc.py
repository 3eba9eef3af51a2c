"""The OpenAPI 3.1 document: ``openapi/base.yaml`` plus one fragment per resource.

Each fragment (``openapi/<resource>.yaml``) may hold ``paths``, ``components`` (merged key by key)
and ``tags``. Fragments keep each resource's contract next to its blueprint's name, so adding a
resource never edits another resource's text.
"""

from __future__ import annotations

import copy
from functools import lru_cache
from importlib import resources

import yaml

__all__ = ["openapi_document"]


def _merge(into: dict, frag: dict, name: str) -> None:
    for path, item in frag.get("paths", {}).items():
        if path in into["paths"]:
            raise ValueError(f"OpenAPI fragment {name}: path {path} defined twice")
        into["paths"][path] = item
    for section, entries in frag.get("components", {}).items():
        target = into.setdefault("components", {}).setdefault(section, {})
        for key, value in entries.items():
            if key in target and target[key] != value:
                raise ValueError(f"OpenAPI fragment {name}: components.{section}.{key} defined twice")
            target[key] = value
    into.setdefault("tags", []).extend(frag.get("tags", []))


@lru_cache(maxsize=1)
def _document() -> dict:
    folder = resources.files("stressmap_api") / "openapi"
    doc = yaml.safe_load((folder / "base.yaml").read_text(encoding="utf-8"))
    doc.setdefault("paths", {})
    for entry in sorted(folder.iterdir(), key=lambda p: p.name):
        if entry.name.endswith(".yaml") and entry.name != "base.yaml":
            _merge(doc, yaml.safe_load(entry.read_text(encoding="utf-8")) or {}, entry.name)
    return doc


def openapi_document() -> dict:
    """A deep copy of the merged document (callers may modify it)."""
    return copy.deepcopy(_document())
