"""InferenceData to a netCDF file through memory.

HDF5 writing straight into a full disk fails deep in the library: it prints a
traceback for every object it frees and can crash the interpreter at exit. Built in
memory (h5netcdf on a BytesIO, the groups ArviZ writes, zlib as ArviZ's default
compress=True), the file reaches the disk by a plain write, whose failure is an
ordinary OSError.
"""
import io
import threading

import numpy as np
import xarray as xr
from xarray.backends import H5NetCDFStore


def _compressible(dtype):
    return np.issubdtype(dtype, np.integer) or np.issubdtype(dtype, np.floating)


def netcdf_bytes(idata):
    """The bytes of idata as a netCDF-4 file, one group per InferenceData group."""
    buf = io.BytesIO()
    mode = "w"
    attrs = getattr(idata, "_attrs", None)
    if attrs:
        _store(xr.Dataset(attrs=attrs), buf, mode, "/", {})
        mode = "a"
    for group in idata.groups():
        data = idata[group]
        encoding = {name: {"zlib": True} for name, var in data.variables.items()
                    if _compressible(var.dtype)}
        _store(data, buf, mode, f"//{group}", encoding)
        mode = "a"
    return buf.getvalue()


def _store(dataset, buf, mode, group, encoding):
    # a lock of our own: inside a Dask worker xarray would ask the scheduler for a lock
    # named after the file, which a memory buffer does not have
    store = H5NetCDFStore.open(buf, mode=mode, group=group, lock=threading.Lock())
    try:
        dataset.dump_to_store(store, encoding=encoding)
    finally:
        store.close()


def write_netcdf(idata, path):
    data = netcdf_bytes(idata)
    with open(path, "wb") as fh:
        fh.write(data)
