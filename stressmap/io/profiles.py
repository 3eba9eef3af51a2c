"""Depth-profile files (CSV); parsing in :mod:`stressmap.formats.profiles`."""

from __future__ import annotations

from pathlib import Path

from stressmap.errors import InputError, problem
from stressmap.formats.profiles import density_profile_from_csv_text

__all__ = ["read_density_profile"]


def read_density_profile(path) -> dict:
    """Density profile file (CSV): columns ``top_km``, ``density_kg_m3`` and optionally
    ``gradient_kg_m3_per_km``; one row per layer from the surface down; '#' starts a comment."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read density profile {path}: {exc}",
                         [problem(str(exc), field="--density-profile")]) from exc
    return density_profile_from_csv_text(text, f"density profile {path}")
