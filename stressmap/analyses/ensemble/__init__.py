"""Ensembles of force magnitudes: how much SHmax and regime could change across plausible forces.

Because the sheet is linear, member ``m``'s stress at point ``p`` is ``sum_g W[m, g] U[g, p]`` with
the stored unit solutions ``U`` (G, P, 3) and sampled weights ``W`` (M, G): an ensemble is matrix
products, never new solves. For each point this module returns

- the axial (circular) mean SHmax azimuth over members and the axial standard deviation
  ``0.5 sqrt(-2 ln R)`` of the doubled angles (Mardia & Jupp 2000, section 9.3.2 -- from memory;
  the same definitions as :mod:`stressmap.geo.circular`), with the mean resultant length ``R``;
- the probability of each Anderson regime (share of members; :func:`stressmap.geo.tensor.regime_code`);
- the mean of Simpson's A-phi regime index over members;
- percentiles of the horizontal principal stresses ``s_hmax`` and ``s_hmin`` (MPa).

Memory stays bounded for any number of points: points are processed in chunks sized from a memory
budget, members in sub-chunks inside each point chunk (all members of a chunk of points are kept so
the percentiles are exact). Chunks run on local threads by default, or on a Dask distributed
cluster when given a scheduler address or client (``dask``/``distributed`` imported only then).

Modules: :mod:`.distributions` (weight distributions and member draws), :mod:`.kernels` (the pure
statistics of a chunk), :mod:`.execution` (chunking on threads or Dask), :mod:`.fields` (a built
model's ensemble at points or on a grid). The PNG picture is :func:`stressmap.plot.ensemble.ensemble_png`.

With no distributions given (and none in the model document), every load group's weight is drawn
uniformly from 0.5 to 1.5 and the result's ``distributions_source`` says so; an ensemble in which
nothing varies is refused. Weights are drawn per load group from ``uniform``, ``log-uniform`` or ``normal`` (optionally
truncated) distributions with a fixed seed. A distribution may be given for a physical parameter
that maps onto the group's weight: ``pull_fraction`` (slab pull is proportional to it),
``slab_age_myr`` (weight = ratio of :func:`stressmap.physics.forces.slab_pull_n_per_m` at the drawn and the
reference age), or ``scale`` / ``weight`` (the weight itself).
"""

from stressmap.analyses.ensemble.distributions import (
    DEFAULT_WEIGHT_RANGE,
    DISTRIBUTIONS,
    PARAMETERS,
    default_distributions,
    parameter_to_weight,
    sample_parameter,
    sample_weights,
    validate_distributions,
    varies,
)
from stressmap.analyses.ensemble.execution import ensemble_statistics
from stressmap.analyses.ensemble.fields import (
    chosen_distributions,
    ensemble_grid,
    ensemble_points,
    flatten_percentiles,
    grid_coordinates,
    percentile_label,
)
from stressmap.analyses.ensemble.kernels import (
    DEFAULT_PERCENTILES,
    STAT_VARIABLES,
    chunk_statistics,
    plan_chunks,
    regime_index_from_principal,
    workspace,
)

__all__ = [
    "DEFAULT_WEIGHT_RANGE",
    "chosen_distributions",
    "default_distributions",
    "varies",
    "DISTRIBUTIONS",
    "PARAMETERS",
    "DEFAULT_PERCENTILES",
    "validate_distributions",
    "sample_parameter",
    "parameter_to_weight",
    "sample_weights",
    "chunk_statistics",
    "workspace",
    "ensemble_statistics",
    "plan_chunks",
    "regime_index_from_principal",
    "grid_coordinates",
    "ensemble_points",
    "ensemble_grid",
    "STAT_VARIABLES",
    "percentile_label",
    "flatten_percentiles",
]
