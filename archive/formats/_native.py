"""Errors of the libraries behind HDF5, NetCDF and ``.npz`` (h5py, netCDF4, zipfile and
zlib), turned into one-line massarc errors, and a bound on what a file's attribute may make
them allocate.

A damaged HDF5 or NetCDF file makes h5py and netCDF4 raise ``OSError``, ``RuntimeError``,
``KeyError`` or ``ValueError`` from any access, not only from opening the file; a damaged
``.npz`` makes zipfile raise ``BadZipFile``, ``EOFError`` or ``zlib.error`` from any member
read, not only from opening the archive; and an
attribute whose dataspace claims billions of elements is allocated (and filled) before it
is read. Both were found by fuzzing (docs/fuzzing.md). What no exception handler can stop
(a crash, a hang, memory exhaustion in the library) is kept out of this process by the
capped source (:mod:`._capped`), in whose child these guards run.
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
