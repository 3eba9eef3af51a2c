"""The built plate model: unit stress fields per load group (see :mod:`stressmap.model.build`)."""

from __future__ import annotations

import logging
from dataclasses import dataclass, field

log = logging.getLogger(__name__)


#: Stress components of the unit fields, in the local (east, north) frame.
COMPONENTS = ("s_ee", "s_nn", "s_en")

#: Largest grid :func:`predict_grid` evaluates in one call.
MAX_GRID_POINTS = 4_000_000



@dataclass(frozen=True)
class BuiltModel:
    """A plate model with its unit stress fields (see :func:`build_model`).

    Attributes
    ----------
    definition : dict
        The validated, normalised plate document.
    fields : xarray.Dataset
        Unit stress fields ``unit_stress_mpa`` (group, node, component) and the mesh
        (``lon``, ``lat`` per node, ``triangles`` (triangle, vertex)), the boundary ring and the
        per-group rotation of the drag closure.
    summary : dict
        JSON-able build report: name, mesh statistics, groups, torque before/after closure,
        omega pole and rate, plate speed range, build time (ISO-8601 UTC), timings.
    """

    definition: dict
    fields: object
    summary: dict
    _cache: dict = field(default_factory=dict, repr=False, compare=False, hash=False)

    @property
    def groups(self) -> list[str]:
        """Load group names, in the order of the unit fields."""
        names = self._cache.get("groups")
        if names is None:  # read once: ~0.05 ms of xarray indexing per call otherwise
            names = self._cache["groups"] = tuple(str(g) for g in self.fields["group"].values)
        return list(names)

    @property
    def default_weights(self) -> dict:
        """Weight 1.0 for every group: the forces the document specifies."""
        return {g: 1.0 for g in self.groups}


