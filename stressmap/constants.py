"""Physical constants, unit conversions and the product's caution text.

Physics defaults for the force laws (densities, diffusivity, ...) live in
``stressmap/data/defaults.toml``; this module holds only fixed values and conversions.
"""

__all__ = [
    "CAUTION",
    "EARTH_RADIUS_KM",
    "EARTH_RADIUS_M",
    "G_M_S2",
    "PA_PER_MPA",
    "SECONDS_PER_MYR",
    "SECONDS_PER_YEAR",
    "M_PER_S_PER_MM_PER_YR",
]

#: Mean Earth radius used for all mechanics (WGS84 read as a sphere), km.
EARTH_RADIUS_KM = 6371.0
EARTH_RADIUS_M = EARTH_RADIUS_KM * 1e3

#: Standard gravity, m/s^2.
G_M_S2 = 9.81

#: Julian year in seconds (IAU), and one million of them.
SECONDS_PER_YEAR = 365.25 * 24 * 3600.0
SECONDS_PER_MYR = 1e6 * SECONDS_PER_YEAR

#: 1 mm/yr expressed in m/s.
M_PER_S_PER_MM_PER_YR = 1e-3 / SECONDS_PER_YEAR

PA_PER_MPA = 1e6

#: The one caution wording used by every output that could inform a drilling, injection or
#: hazard decision (README, Caution).
CAUTION = (
    "Screening estimate from a regional, plate-scale model. It does not replace site-specific "
    "engineering studies, in-situ stress measurements, local codes and regulations, or the "
    "judgement of licensed professionals."
)
