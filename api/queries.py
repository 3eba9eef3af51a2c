"""Former name of :mod:`stressmap_api.requests` (every name re-exported); import from there."""

from stressmap_api.requests import *
from stressmap_api.requests import __all__  # noqa: F401
