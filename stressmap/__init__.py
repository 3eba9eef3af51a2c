"""stressmap: geodynamic stress-field prediction for plate interiors.

Layering rule (kept by every module; lower layers never take higher-layer objects):

1. ``constants``, ``errors``            -- plain values and the exception hierarchy.
2. numerical core (pure numpy in, numpy out; never opens files, never imports flask):
   ``thermal``, ``forces``, ``sphere``, ``tensor``, ``circular``, ``mesh``, ``sheet``, ``loads``,
   ``focal``, ``screening`` ...
3. composition (small dataclasses of arrays, xarray/geopandas objects): ``plate``, ``model``,
   ``indicators``, ``compare``, ``calibrate``, ``ensemble`` ...
4. edges: ``io``-style modules (files), ``cli`` (terminal), and the separate ``stressmap_api``
   package (HTTP).

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
