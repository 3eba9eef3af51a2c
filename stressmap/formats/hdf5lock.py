"""The process-wide lock around the netCDF/HDF5 library.

The HDF5 library under netCDF4 is not thread-safe: two threads opening, reading or writing
netCDF-4 files at the same time can crash the whole process (a segmentation fault, not an
exception). Every netCDF read or write of the package and the service holds :data:`NETCDF_LOCK`
for the whole open-load-close (files are loaded fully into memory inside it, so no lazy read
reaches HDF5 later from another thread). Re-entrant, so a helper may call another helper.
"""

from __future__ import annotations

import threading

__all__ = ["NETCDF_LOCK"]

#: Held for every open/load/close of a netCDF file in this process.
NETCDF_LOCK = threading.RLock()
