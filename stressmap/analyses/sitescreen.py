"""Site and fault screening from a request to a result: the public entry points in one place.

One request format serves the CLI and the HTTP service. The work is split by concept:

- :mod:`stressmap.analyses.site_request` -- :func:`parse_request` validates a request and collects
  every problem with its field name (:class:`ScreenRequest`);
- :mod:`stressmap.analyses.site_result` -- :func:`screen` turns it into a :class:`ScreenResult`
  (orientation from a model or the user, Sv, Pp, magnitudes at frictional equilibrium, every plane
  resolved and ranked by its pore-pressure margin);
- :mod:`stressmap.analyses.site_sampling` -- Monte-Carlo propagation of the uncertain inputs.

Serialisers (JSON, GeoJSON, CSV) and the reading of GeoJSON faults and indicators in a request
are edges: :mod:`stressmap.formats.screening`; pictures: :mod:`stressmap.plot.screening`.
"""

from __future__ import annotations

from stressmap.analyses.site_request import (
    DEFAULTS,
    ScreenRequest,
    parse_plane_text,
    parse_request,
    parse_site_text,
)
from stressmap.analyses.site_result import (
    ScreenResult,
    collect_planes,
    orientation_from_model,
    screen,
)
from stressmap.analyses.site_sampling import (
    ensemble_orientation,
    fault_margins,
    indicator_spread_deg,
    sample_screening,
)

__all__ = [
    "DEFAULTS",
    "ScreenRequest",
    "ScreenResult",
    "collect_planes",
    "ensemble_orientation",
    "fault_margins",
    "indicator_spread_deg",
    "orientation_from_model",
    "parse_plane_text",
    "parse_request",
    "parse_site_text",
    "sample_screening",
    "screen",
]
