"""How a run is laid out in Zarr: dtypes, chunk shapes, codecs, fill values.

Chunks hold whole lattices of one replica, ``(1, t, *lattice)``, with ``t`` chosen for about
:data:`TARGET_CHUNK_BYTES` uncompressed. Codecs: Blosc zstd with bit-shuffle, then a crc32c
checksum so that a corrupted chunk is an error, not silently wrong numbers. Every chunk is
stored (``write_empty_chunks``) and the fill value of ``mass`` is the largest value of its
dtype, which the dtype is chosen never to hold: a lost chunk reads as that sentinel and is
detectable.
"""

from __future__ import annotations

import math

import numpy as np
import zarr
from zarr.codecs import BloscCodec, Crc32cCodec

from massarc.schema.spec import MASS, TIME, mass_dimensions

__all__ = [
    "TARGET_CHUNK_BYTES",
    "TIME_CHUNK",
    "chunk_snapshots",
    "codecs",
    "create_run_arrays",
    "create_series_array",
    "mass_dtype",
    "sentinel",
]

#: Uncompressed size aimed at for one chunk of ``mass`` (the format allows 1 to 8 MiB).
TARGET_CHUNK_BYTES = 4 * 1024 * 1024
#: Chunk length of the ``time`` array (and of the optional inflow/outflow arrays).
TIME_CHUNK = 65536

_UNSIGNED = (np.uint8, np.uint16, np.uint32, np.uint64)


def mass_dtype(max_mass: int) -> np.dtype:
    """Smallest unsigned dtype whose largest value exceeds ``max_mass`` (that value is the
    missing-chunk sentinel, so it must never be a real mass).

    >>> mass_dtype(254), mass_dtype(255)
    (dtype('uint8'), dtype('uint16'))
    """
    if max_mass < 0:
        raise ValueError(f"expected a non-negative total mass, got {max_mass}")
    for dt in _UNSIGNED:
        if max_mass < np.iinfo(dt).max:
            return np.dtype(dt)
    raise ValueError(f"total mass {max_mass} does not fit in 63 bits")


def sentinel(dtype: np.dtype) -> int:
    """Fill value of ``mass``: the largest value of an integer dtype."""
    return int(np.iinfo(dtype).max)


def chunk_snapshots(lattice: tuple[int, ...], dtype: np.dtype, hint: int | None = None) -> int:
    """Snapshots per chunk: about TARGET_CHUNK_BYTES of whole lattices, at least one.

    ``hint`` (the expected number of snapshots, when known) caps it so that small runs do
    not allocate one oversized, mostly empty chunk.

    >>> chunk_snapshots((1000,), np.dtype("uint8"))
    4194
    """
    per_snapshot = math.prod(lattice) * np.dtype(dtype).itemsize
    n = max(1, TARGET_CHUNK_BYTES // per_snapshot)
    if hint is not None and hint > 0:
        n = min(n, hint)
    return int(n)


def codecs(dtype: np.dtype, clevel: int = 5) -> list:
    """The default bytes-to-bytes codec chain: Blosc zstd with bit-shuffle, then crc32c."""
    shuffle = "bitshuffle" if np.dtype(dtype).kind in "ui" else "shuffle"
    return [BloscCodec(cname="zstd", clevel=clevel, shuffle=shuffle), Crc32cCodec()]


def create_run_arrays(
    group: zarr.Group,
    lattice: tuple[int, ...],
    dtype: np.dtype,
    *,
    hint: int | None = None,
    clevel: int = 5,
    time_units: str = "model time",
) -> None:
    """Create the empty ``mass`` and ``time`` arrays of a run (FORMAT.md, section 2)."""
    tc = chunk_snapshots(lattice, dtype, hint)
    group.create_array(
        MASS,
        shape=(0, 0, *lattice),
        chunks=(1, tc, *lattice),
        dtype=dtype,
        fill_value=sentinel(dtype),
        dimension_names=mass_dimensions(len(lattice)),
        compressors=codecs(dtype, clevel),
        attributes={"long_name": "mass per site"},
        config={"write_empty_chunks": True},
    )
    group.create_array(
        TIME,
        shape=(0,),
        chunks=(TIME_CHUNK,),
        dtype="float64",
        fill_value=float("nan"),
        dimension_names=("time",),
        compressors=codecs(np.dtype("float64"), clevel),
        attributes={"units": time_units},
        config={"write_empty_chunks": True},
    )


def create_series_array(
    group: zarr.Group, key: str, extent: tuple[int, int], *, clevel: int = 5
) -> None:
    """Create an optional ``(replica, time)`` series such as ``inflow`` (FORMAT.md, 2.3)."""
    group.create_array(
        key,
        shape=extent,
        chunks=(1, TIME_CHUNK),
        dtype="int64",
        fill_value=np.iinfo(np.int64).min,
        dimension_names=("replica", "time"),
        compressors=codecs(np.dtype("int64"), clevel),
        attributes={"long_name": f"cumulative mass {key} since the first snapshot"},
        config={"write_empty_chunks": True},
    )
