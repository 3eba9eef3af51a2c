"""Former name of :mod:`stressmap_api.requests` (every name re-exported); import from there."""

from stressmap_api.requests import *  # noqa: F401,F403
from stressmap_api.requests import __all__  # noqa: F401
