"""The content digest of a run: SHA-256 over its canonical header and decoded arrays.

The digest depends on what the run says, not on how it is stored: re-encoding the archive
with other codecs, compression levels or chunk shapes keeps it; changing any mass, time,
series or event value, the data type of an array, or any value of the header changes it.
The byte stream hashed is specified in schema/FORMAT.md, section 10, so that another
implementation can reproduce it; in short::

    frame(b) = len(b) as 8-byte little-endian unsigned integer, then b
    stream   = frame("massarc-content-digest") frame("1")
               frame(canonical JSON of the header)
               for each array, by name: frame(name) frame(dtype) frame(JSON shape)
                                        8-byte length, then the values (C order, little-endian)

Arrays are read a block of whole chunks at a time, so memory stays at about one chunk.

>>> from pathlib import Path
>>> from massarc.archive import open_run
>>> d = content_digest(open_run("tests/fixtures/stamp/ring-stamped.zarr"))
>>> d.value == (Path("tests/fixtures/stamp/ring-stamped.digest").read_text().split()[0])
True
>>> sorted(d.parts)
['mass', 'metadata', 'time']
"""

from __future__ import annotations

import hashlib
import json
import math
import struct
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import zarr

from massarc.schema.spec import (
    ATTRIBUTE_KEY,
    DIGEST_ALGORITHM,
    DIGEST_TAG,
    DIGEST_VERSION,
    EVENTS,
    INFLOW,
    MASS,
    OUTFLOW,
    TIME,
)

from .errors import ArchiveError
from .reader import DECODE_ERRORS, Run

__all__ = ["Digest", "canonical_json", "content_digest"]

#: Values hashed per block of a 1-D or series array (the mass array goes chunk by chunk).
_BLOCK = 1 << 16


@dataclass(frozen=True)
class Digest:
    """A run's content digest: ``value`` (lowercase hex SHA-256 of the whole stream) and
    ``parts`` (SHA-256 of each part's own frames: ``metadata`` and one per array), which
    name what differs when two digests do not match."""

    value: str
    parts: dict[str, str] = field(default_factory=dict)
    algorithm: str = DIGEST_ALGORITHM
    version: int = DIGEST_VERSION

    def differing(self, other: dict[str, str]) -> list[str]:
        """The parts whose digests differ from ``other`` (a part on one side only included)."""
        names = sorted(set(self.parts) | set(other))
        return [n for n in names if self.parts.get(n) != other.get(n)]


def canonical_json(value: Any) -> bytes:
    """Canonical JSON (FORMAT.md 10.2): sorted keys, no whitespace, UTF-8, integers as
    integers, other numbers as the shortest repr that round-trips a binary64.

    >>> canonical_json({"b": [1, 2.5e-07], "a": "é"})
    b'{"a":"\\xc3\\xa9","b":[1,2.5e-07]}'
    """
    try:
        text = json.dumps(
            value, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
        )
    except (TypeError, ValueError) as exc:
        raise ArchiveError(f"header: cannot be written as canonical JSON ({exc})") from None
    return text.encode("utf-8")


def _frame(data: bytes) -> bytes:
    return struct.pack("<Q", len(data)) + data


class _Hashes:
    """The whole-stream hash and the hash of the part being written."""

    def __init__(self) -> None:
        self.whole = hashlib.sha256()
        self.parts: dict[str, str] = {}
        self._part: Any = None

    def begin(self, name: str) -> None:
        self._part = hashlib.sha256()
        self._name = name

    def update(self, data: bytes | memoryview) -> None:
        self.whole.update(data)
        self._part.update(data)

    def end(self) -> None:
        self.parts[self._name] = self._part.hexdigest()


def _header(run: Run) -> Any:
    raw = run.group.attrs.get(ATTRIBUTE_KEY)
    if not isinstance(raw, dict):
        raise ArchiveError(f"{run.name}: no massarc header to digest")
    return raw


def _arrays(run: Run) -> list[tuple[str, zarr.Array, tuple[int, ...]]]:
    """``(name, array, committed shape)`` of every array the digest covers, in name order."""
    r, t = run.n_replicas, run.n_snapshots
    out = [(MASS, run.mass, run.shape), (TIME, run.array(TIME), (t,))]
    if out[1][1] is None:
        raise ArchiveError(f"{run.name}: {run.unreadable.get(TIME, f'no {TIME!r} array')}")
    for key in (INFLOW, OUTFLOW):
        arr = run.array(key)
        if arr is not None:
            out.append((key, arr, (r, t)))
    events = run.events
    if events is not None:
        for key, arr in sorted(events.arrays()):
            out.append((f"{EVENTS}/{key}", arr, tuple(int(n) for n in arr.shape)))
    for name, arr, shape in out:
        have = tuple(int(n) for n in arr.shape)
        if len(have) != len(shape) or any(a < b for a, b in zip(have, shape, strict=True)):
            raise ArchiveError(
                f"{run.name}: {name}: expected shape {list(shape)} or larger; got {list(have)}"
            )
    return sorted(out, key=lambda item: item[0].encode("utf-8"))


def _blocks(run: Run, name: str, arr: zarr.Array, shape: tuple[int, ...]) -> Iterator[np.ndarray]:
    """The committed values of one array in C order, a block at a time."""
    if name == MASS:
        for chunk in run.chunks():  # replica-major then time: C order; ChunkError if lost
            yield chunk.mass
        return
    if not shape or math.prod(shape) == 0:
        return
    rows = [()] if len(shape) == 1 else [(i,) for i in range(shape[0])]
    n = shape[-1]
    for row in rows:
        for lo in range(0, n, _BLOCK):
            hi = min(lo + _BLOCK, n)
            try:
                yield np.asarray(arr[(*row, slice(lo, hi))])
            except DECODE_ERRORS as exc:
                at = f"{name}[{', '.join(map(str, (*row, f'{lo}:{hi}')))}]"
                raise ArchiveError(f"{run.name}: {at} cannot be decoded ({exc})") from None


def content_digest(run: Run) -> Digest:
    """The content digest of ``run`` (FORMAT.md, section 10): committed extent only.

    Raises :class:`ArchiveError` when the header or an array cannot be read (a missing or
    corrupt ``mass`` chunk raises :class:`~massarc.archive.errors.ChunkError`).
    """
    h = _Hashes()
    h.whole.update(_frame(DIGEST_TAG.encode()) + _frame(str(DIGEST_VERSION).encode()))
    h.begin("metadata")
    h.update(_frame(canonical_json(_header(run))))
    h.end()
    for name, arr, shape in _arrays(run):
        dtype = np.dtype(arr.dtype)
        if dtype.kind not in "uifb":
            raise ArchiveError(f"{run.name}: {name}: expected a numeric data type; got {dtype}")
        little = dtype.newbyteorder("<")
        h.begin(name)
        h.update(_frame(name.encode("utf-8")))
        h.update(_frame(dtype.name.encode("ascii")))
        h.update(_frame(canonical_json(list(shape))))
        h.update(struct.pack("<Q", math.prod(shape) * dtype.itemsize))
        for block in _blocks(run, name, arr, shape):
            h.update(memoryview(np.ascontiguousarray(block, dtype=little)).cast("B"))
        h.end()
    return Digest(h.whole.hexdigest(), h.parts)
