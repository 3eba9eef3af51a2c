"""PNG map of an ensemble: mean SHmax ticks with the members' spread."""

from __future__ import annotations

import numpy as np

from stressmap.plot.maps import shmax_map

__all__ = ["ensemble_png"]


def ensemble_png(ds, outline=None, title=None, caption=None) -> bytes:
    """PNG map of an ensemble: mean SHmax ticks coloured by the mean A-phi, with the axial
    standard deviation drawn as a fan around each tick (:func:`stressmap.plot.maps.shmax_map`)."""

    if "point" in ds.dims:
        lon = np.asarray(ds["lon"].values, float)
        lat = np.asarray(ds["lat"].values, float)
        get = lambda name: np.asarray(ds[name].values, float).ravel()
    else:
        lon2, lat2 = np.meshgrid(np.asarray(ds["lon"].values, float),
                                 np.asarray(ds["lat"].values, float))
        lon, lat = lon2.ravel(), lat2.ravel()
        get = lambda name: np.asarray(ds[name].transpose("lat", "lon").values, float).ravel()
    members = ds.attrs.get("members", "")
    return shmax_map(lon, lat, get("shmax_azimuth_deg"), get("regime_index"), outline,
                     uncertainty_deg=get("shmax_std_deg"),
                     title=title or f"Ensemble mean SHmax and 1-sigma spread ({members} members)",
                     caption=caption)