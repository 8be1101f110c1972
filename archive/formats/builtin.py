"""Import every built-in format module, which registers it (detection order is this order:
specific content signatures first, the plain text format last)."""

from __future__ import annotations

from . import (  # noqa: F401
    csv_long,
    csv_wide,
    events,
    hdf5,
    netcdf,
    npy,
    npz,
    positions,
    text,
    zarr_run,
)

__all__: list[str] = []
