"""The first bytes by which the formats recognise binary files (their ``sniff``)."""

from __future__ import annotations

__all__ = ["HDF5_MAGIC", "NETCDF4_MARKS", "NETCDF_CLASSIC_MAGIC", "NPY_MAGIC", "ZIP_MAGIC"]

#: A ``.npy`` file, and every member of an ``.npz``.
NPY_MAGIC = b"\x93NUMPY"
#: An HDF5 file (NetCDF-4 files are HDF5 files too).
HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"
#: NetCDF classic, 64-bit offset and CDF-5 files.
NETCDF_CLASSIC_MAGIC = (b"CDF\x01", b"CDF\x02", b"CDF\x05")
#: Names the netCDF library and h5netcdf write into a NetCDF-4 file (an HDF5 file), found
#: in its first bytes (object headers, written before the data) without the HDF5 library:
#: the root attribute ``_NCProperties``, the dimension scales of a variable.
NETCDF4_MARKS = (b"_NCProperties", b"DIMENSION_LIST")
#: A zip file: an ``.npz``, or a zipped run archive.
ZIP_MAGIC = b"PK\x03\x04"
