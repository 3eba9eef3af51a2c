"""Depth profiles from CSV text (no paths: :func:`stressmap.io.profiles.read_density_profile`
opens the file)."""

from __future__ import annotations

import io
import math

from stressmap.errors import InputError, problem

__all__ = ["density_profile_from_csv_text", "PROFILE_COLUMNS"]

#: Columns of a density profile: layer top (km below the surface), density (kg/m^3) and an
#: optional density gradient within the layer (kg/m^3 per km).
PROFILE_COLUMNS = ("top_km", "density_kg_m3", "gradient_kg_m3_per_km")


def density_profile_from_csv_text(text: str, name: str = "density profile") -> dict:
    """A density profile (``{column: list of floats}``) from CSV text, one row per layer from the
    surface down; ``#`` starts a comment line.

    Examples
    --------
    >>> density_profile_from_csv_text("top_km,density_kg_m3\\n0,2300\\n2,2600\\n")
    {'top_km': [0.0, 2.0], 'density_kg_m3': [2300.0, 2600.0]}
    """
    import pandas as pd

    try:
        frame = pd.read_csv(io.StringIO(text), comment="#", skipinitialspace=True)
    except (ValueError, pd.errors.ParserError) as exc:  # EmptyDataError is a ValueError
        raise InputError(f"cannot read {name}: {exc}",
                         [problem(str(exc), field="--density-profile")]) from exc
    missing = [c for c in PROFILE_COLUMNS[:2] if c not in frame.columns]
    if missing:
        raise InputError(f"{name} lacks column(s) {', '.join(missing)}",
                         [problem("required column missing", field=c) for c in missing])
    out = {}
    for col in PROFILE_COLUMNS:
        if col not in frame.columns:
            continue
        values = pd.to_numeric(frame[col], errors="coerce").astype(float)
        bad = [i + 1 for i, v in enumerate(values.tolist()) if not math.isfinite(v)]
        if bad:
            raise InputError(f"{name}: column {col} has non-numbers",
                             [problem("not a number", field=col, row=r) for r in bad])
        out[col] = values.tolist()
    return out
