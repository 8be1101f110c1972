"""Axis names of a stored mass array, and where its snapshot times come from.

Array formats (``.npy``, ``.npz``, HDF5, NetCDF) hold the masses as one N-d array whose
axes are named ``replica``, ``time`` and ``site`` (or ``y``, ``x`` on a 2-D lattice). The
default order puts replica and time first and the lattice last; ``--option order=``
names another one.
"""

from __future__ import annotations

import numpy as np

from massarc.schema import RunMeta

from ..errors import ArchiveError, DataError
from ._options import parse_times

__all__ = ["axes_for", "default_axes", "lattice_axes", "parse_axes", "times_for"]


def lattice_axes(ndim: int) -> tuple[str, ...]:
    """Names of the lattice axes: ``site`` in 1-D, ``y, x`` in 2-D."""
    return ("site",) if ndim == 1 else ("y", "x")


def default_axes(ndim: int, lattice_ndim: int) -> tuple[str, ...] | None:
    """Axis names of a stored mass array: replica and time axes first, lattice last."""
    lat = lattice_axes(lattice_ndim)
    if ndim == lattice_ndim + 1:
        return ("time", *lat)
    if ndim == lattice_ndim + 2:
        return ("replica", "time", *lat)
    return None


def parse_axes(value: str, ndim: int, lattice_ndim: int, key: str = "order") -> tuple[str, ...]:
    """Validate an axis order such as ``time,replica,site``."""
    axes = tuple(a.strip() for a in str(value).split(",") if a.strip())
    lat = set(lattice_axes(lattice_ndim))
    allowed = {"replica", "time"} | lat
    want = ",".join(default_axes(ndim, lattice_ndim) or ("replica", "time", *sorted(lat)))
    if (
        len(axes) != ndim
        or len(set(axes)) != ndim
        or not set(axes) <= allowed
        or "time" not in axes
        or not lat <= set(axes)
    ):
        raise ArchiveError(
            f"option {key}: expected {ndim} distinct axis names such as {want}; got {value!r}"
        )
    return axes


def axes_for(
    shape: tuple[int, ...], meta: RunMeta, order: str | None, name: str
) -> tuple[str, ...]:
    """The axis names of a stored mass array under ``meta`` (or ``order``)."""
    lat_nd = meta.lattice.ndim
    if order:
        return parse_axes(order, len(shape), lat_nd)
    axes = default_axes(len(shape), lat_nd)
    if axes is None:
        lat = "site" if lat_nd == 1 else "y, x"
        raise DataError(
            f"{name}: expected a ({'time, ' + lat}) or (replica, time, {lat}) array for the "
            f"{lat_nd}-D lattice of the metadata; got shape {list(shape)} (give the axes with "
            "--option order=...)"
        )
    return axes


def times_for(
    n: int, option: str | None, stored: np.ndarray | None, name: str, what: str
) -> np.ndarray:
    """Snapshot times: the option, else the stored array, else 0..n-1."""
    if option is not None:
        return parse_times(option, n)
    if stored is None:
        return np.arange(n, dtype=np.float64)
    t = np.asarray(stored).reshape(-1)
    if len(t) != n:
        raise DataError(
            f"{name}: {what}: expected {n} times (the length of the time axis of the masses); "
            f"got {len(t)}"
        )
    if t.dtype.kind not in "fiu":
        raise DataError(f"{name}: {what}: expected numeric times; got dtype {t.dtype}")
    return t.astype(np.float64)
