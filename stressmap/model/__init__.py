"""Plate models: documents, ring geometry, build stages, the built model and prediction.

Submodules: :mod:`~stressmap.model.plate` (document parsing), :mod:`~stressmap.model.ring` (ring
geometry),
:mod:`~stressmap.model.build` (the build stages), :mod:`~stressmap.model.built` (the built model),
:mod:`~stressmap.model.predict` (weighted fields at query points).
"""

from stressmap.model.build import build_model
from stressmap.model.built import COMPONENTS, MAX_GRID_POINTS, BuiltModel
from stressmap.model.predict import (
    locate,
    plate_outline,
    predict_grid,
    predict_points,
    resolve_weights,
    stress_at,
    unit_stress_at,
)

__all__ = [
    "BuiltModel",
    "COMPONENTS",
    "MAX_GRID_POINTS",
    "build_model",
    "resolve_weights",
    "unit_stress_at",
    "stress_at",
    "predict_points",
    "predict_grid",
    "plate_outline",
    "locate",
]
