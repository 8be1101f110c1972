"""Errors of the libraries behind HDF5, NetCDF and ``.npz`` (h5py, netCDF4, zipfile and
zlib), turned into one-line massarc errors, and a bound on what a file's attribute may make
them allocate.

A damaged HDF5 or NetCDF file makes h5py and netCDF4 raise ``OSError``, ``RuntimeError``,
``KeyError`` or ``ValueError`` from any access, not only from opening the file; a damaged
``.npz`` makes zipfile raise ``BadZipFile``, ``EOFError`` or ``zlib.error`` from any member
read, not only from opening the archive; and an
attribute whose dataspace claims billions of elements is allocated (and filled) before it
is read. Both were found by fuzzing (docs/fuzzing.md).
"""

from __future__ import annotations

import functools
import inspect
import math
import zipfile
import zlib
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any, TypeVar

from massarc.schema import MetadataError

from ..errors import ArchiveError, DataError

__all__ = [
    "MAX_ATTRIBUTE_VALUES",
    "attribute_shape",
    "bounded_attribute",
    "guard_source",
    "native_errors",
    "probe_structure",
]

_C = TypeVar("_C", bound=type)
#: The methods of a Source that touch the file.
_GUARDED = ("__init__", "hints", "mapped", "n_snapshots_for", "batches")

#: Most values an attribute massarc reads may hold (metadata is one string).
MAX_ATTRIBUTE_VALUES = 1 << 16


@contextmanager
def native_errors(name: str) -> Iterator[None]:
    """Re-raise what the native library raises on a damaged file as :class:`DataError`
    naming ``name``; massarc's own errors pass through."""
    try:
        yield
    except (ArchiveError, MetadataError):
        raise
    except (
        OSError,
        RuntimeError,
        KeyError,
        ValueError,
        TypeError,
        IndexError,
        EOFError,
        NotImplementedError,  # zipfile: a compression method it does not know
        zipfile.BadZipFile,
        zlib.error,
    ) as exc:
        why = " ".join(str(exc).split())[:200] or type(exc).__name__
        raise DataError(f"{name}: damaged or unreadable file ({why})") from None


def bounded_attribute(shape: tuple[int, ...] | None, name: str) -> None:
    """Refuse an attribute of more than :data:`MAX_ATTRIBUTE_VALUES` values before it is
    read."""
    n = math.prod(shape) if shape else 1
    if n > MAX_ATTRIBUTE_VALUES:
        raise DataError(f"{name}: attribute of {n} values; expected at most {MAX_ATTRIBUTE_VALUES}")


def attribute_shape(attr_id: Any) -> tuple[int, ...] | None:
    """The dataspace shape of an h5py attribute id (None for a scalar or null one)."""
    shape = getattr(attr_id, "shape", None)
    return tuple(int(n) for n in shape) if shape is not None else None


def _guarded(method: Any) -> Any:
    if inspect.isgeneratorfunction(method):

        @functools.wraps(method)
        def gen(self: Any, *args: Any, **kwargs: Any) -> Any:
            with native_errors(str(getattr(self, "name", "") or (args[0] if args else ""))):
                yield from method(self, *args, **kwargs)

        return gen

    @functools.wraps(method)
    def call(self: Any, *args: Any, **kwargs: Any) -> Any:
        with native_errors(str(getattr(self, "name", "") or (args[0] if args else ""))):
            return method(self, *args, **kwargs)

    return call


def guard_source(cls: _C) -> _C:
    """Class decorator: every method of a :class:`Source` that reads the file raises
    :class:`DataError` for what the native library raises on a damaged file."""
    for attr in _GUARDED:
        if attr in cls.__dict__:
            setattr(cls, attr, _guarded(cls.__dict__[attr]))
    return cls


#: Address space of the probe child: room for Python, NumPy and the HDF5 library, not for
#: what a damaged file could make them allocate.
PROBE_MEMORY = 1 << 30
#: Seconds the probe child may take to walk a file's structure.
PROBE_SECONDS = 60.0

#: The probe: walk every group, dataset and attribute (reading attribute values, which
#: is where damaged files made the library hang or allocate without bound). A Python
#: exception is not the probe's business (the reader reports it): it exits 0.
_PROBE = """
import resource, sys
cap = int(sys.argv[3])
resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
# CPU seconds: PROBE_SECONDS and a margin, so that a probe whose parent was killed (and so
# never times it out) cannot spin on a damaged file for ever
resource.setrlimit(resource.RLIMIT_CPU, (70, 70))
try:
    if sys.argv[1] == "hdf5":
        import h5py
        def walk(node):
            for key in node.attrs:
                node.attrs[key]
            if isinstance(node, h5py.Group):
                for child in node.values():
                    walk(child)
            else:
                node.shape, node.dtype, [d.label for d in node.dims]
        with h5py.File(sys.argv[2], "r") as f:
            walk(f)
    else:
        import netCDF4
        def walk(group):
            for key in group.ncattrs():
                group.getncattr(key)
            for var in group.variables.values():
                var.dimensions, var.shape, var.dtype
                for key in var.ncattrs():
                    var.getncattr(key)
            for child in group.groups.values():
                walk(child)
        with netCDF4.Dataset(sys.argv[2], "r") as ds:
            walk(ds)
except MemoryError:
    sys.exit(3)
except Exception:
    pass
"""


def probe_structure(kind: str, path: Any, name: str) -> None:
    """Walk the structure of an HDF5 (``kind="hdf5"``) or NetCDF file in a child process
    under an address-space cap and a time limit, before this process opens it: a damaged
    file can make the native library crash, hang or allocate without bound, which no
    exception handler here could stop (found by fuzzing, docs/fuzzing.md). Raises
    :class:`DataError` naming the file when the child does not finish cleanly."""
    import os
    import subprocess
    import sys

    library = "HDF5" if kind == "hdf5" else "NetCDF"
    env = {**os.environ, "MALLOC_ARENA_MAX": "2", "OMP_NUM_THREADS": "1"}
    args = [sys.executable, "-c", _PROBE, kind, os.fspath(path), str(PROBE_MEMORY)]
    try:
        done = subprocess.run(
            args, capture_output=True, timeout=PROBE_SECONDS, env=env, check=False
        )
    except subprocess.TimeoutExpired:
        raise DataError(
            f"{name}: damaged file: the {library} library did not finish reading its "
            f"structure in {PROBE_SECONDS:.0f} s"
        ) from None
    if done.returncode < 0:
        raise DataError(
            f"{name}: damaged file: the {library} library crashed reading its structure "
            f"(signal {-done.returncode})"
        )
    if done.returncode != 0:
        raise DataError(
            f"{name}: damaged file: reading its structure needs more than {PROBE_MEMORY >> 20} MiB"
        )
