"""stressmap: geodynamic stress-field prediction for plate interiors.

Layering rule (enforced by tests/test_layers.py; data flows downward only, lower layers never take
higher-layer objects):

core -- pure functions of numpy arrays and small dataclasses; never opens files, never imports flask
  1. ``constants``, ``errors``, ``validate`` -- plain values, the one error tree, the one validator.
  2. ``geo``      -- sphere vectors, tensors, axial statistics, focal geometry, the lon/lat grid.
  3. ``physics``  -- cooling models and plate-driving force laws.
  4. ``fem``      -- mesh of a spherical polygon, thin-sheet assembly/factorisation, loads.
  5. ``model``    -- plate documents, build stages, the built model, prediction.
  6. ``analyses`` -- indicators, comparison, observed field, calibration, ensembles, screening.
edges -- may import the core, never the reverse
  7. ``formats``  -- text/bytes <-> tables and datasets (no paths).
  8. ``io``       -- paths and files.
  9. ``plot``     -- PNG pictures.
 10. ``cli``      -- the terminal; the service is the separate ``stressmap_api`` package (api/).

Heavy optional packages (matplotlib, dask, reference libraries) are imported inside the functions
that need them, so ``import stressmap`` stays light.

Conventions: lon/lat degrees on a sphere of radius 6371.0 km; azimuths clockwise from north, axial
quantities in [0, 180); stress compression-positive in every output (MPa); forces per unit length in
N/m; ages in Myr; rates in mm/yr.
"""

from stressmap.constants import CAUTION
from stressmap.errors import InputError, StressmapError

__version__ = "0.1.0"

__all__ = ["CAUTION", "InputError", "StressmapError", "__version__"]
