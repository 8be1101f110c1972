"""Parsing of ``--option key=value`` strings shared by the formats, and the options of
writing into a run archive.

Every value arrives as a string; these helpers turn it into what a format needs and
raise :class:`~massarc.archive.ArchiveError` with "expected X; got Y" otherwise.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from ..errors import ArchiveError

__all__ = [
    "ARCHIVE_WRITE_OPTIONS",
    "archive_options",
    "as_bool",
    "as_float",
    "as_int",
    "guard_options",
    "parse_times",
    "understands",
]

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off"}


def understands(known: Mapping[str, str], key: str) -> bool:
    """Whether ``key`` is one of the ``known`` options (``attrs.NAME`` stands for every
    ``attrs.*`` key)."""
    return key in known or (key.startswith("attrs.") and "attrs.NAME" in known)


def guard_options(options: Mapping[str, str], known: Mapping[str, str], what: str) -> None:
    """Raise for an option ``what`` (e.g. "reading npz") does not understand."""
    for key in options:
        if not understands(known, key):
            names = ", ".join(known) or "none"
            raise ArchiveError(f"unknown option {key!r} for {what}; expected one of: {names}")


def as_bool(value: str, key: str) -> bool:
    low = str(value).strip().lower()
    if low in _TRUE:
        return True
    if low in _FALSE:
        return False
    raise ArchiveError(f"option {key}: expected true or false; got {value!r}")


def as_int(value: str, key: str, minimum: int | None = None) -> int:
    try:
        out = int(str(value).strip())
    except ValueError:
        raise ArchiveError(f"option {key}: expected an integer; got {value!r}") from None
    if minimum is not None and out < minimum:
        raise ArchiveError(f"option {key}: expected an integer >= {minimum}; got {out}")
    return out


def as_float(value: str, key: str, positive: bool = False) -> float:
    try:
        out = float(str(value).strip())
    except ValueError:
        raise ArchiveError(f"option {key}: expected a number; got {value!r}") from None
    if not np.isfinite(out) or (positive and out <= 0):
        want = "a finite number > 0" if positive else "a finite number"
        raise ArchiveError(f"option {key}: expected {want}; got {value!r}")
    return out


def parse_times(value: str, n: int | None, key: str = "times") -> np.ndarray:
    """Snapshot times from ``start:step``, ``start:stop:step`` (stop inclusive), a comma
    list, or a ``.npy``/text file of times. ``n`` (when known) is the number required.

    >>> parse_times("0:0.5", 3)
    array([0. , 0.5, 1. ])
    """
    text = str(value).strip()
    if ":" in text and not Path(text).exists():
        parts = [as_float(p, key) for p in text.split(":")]
        if len(parts) == 2:
            if n is None:
                raise ArchiveError(
                    f"option {key}: expected start:stop:step here (the number of snapshots "
                    f"is not known); got {value!r}"
                )
            start, step = parts
            out = start + step * np.arange(n, dtype=np.float64)
        elif len(parts) == 3:
            start, stop, step = parts
            if step <= 0 or stop < start:
                raise ArchiveError(f"option {key}: expected start <= stop and step > 0")
            count = int(np.floor((stop - start) / step * (1 + 1e-12))) + 1
            out = start + step * np.arange(count, dtype=np.float64)
        else:
            raise ArchiveError(f"option {key}: expected start:step or start:stop:step")
    elif Path(text).is_file():
        path = Path(text)
        try:
            out = np.load(path) if path.suffix == ".npy" else np.loadtxt(path, ndmin=1)
        except (OSError, ValueError) as exc:
            raise ArchiveError(f"option {key}: cannot read times from {path} ({exc})") from None
        out = np.asarray(out, dtype=np.float64).reshape(-1)
    else:
        out = np.array([as_float(p, key) for p in text.split(",") if p.strip()])
    if n is not None and len(out) != n:
        raise ArchiveError(f"option {key}: expected {n} times (one per snapshot); got {len(out)}")
    return out


#: Options of writing into a run archive: ``convert X run.zarr --option max-mass=N``.
ARCHIVE_WRITE_OPTIONS: Mapping[str, str] = MappingProxyType(
    {
        "max-mass": "largest site mass to provide for (chooses the dtype; default: the total)",
        "clevel": "zstd compression level 1-9 (default 5)",
    }
)


def archive_options(options: Mapping[str, str]) -> dict[str, Any]:
    """``max-mass`` and ``clevel`` as keyword arguments of :func:`.stream.write_source`."""
    out: dict[str, Any] = {}
    if "max-mass" in options:
        out["max_mass"] = as_int(options["max-mass"], "max-mass", minimum=0)
    if "clevel" in options:
        level = as_int(options["clevel"], "clevel", minimum=1)
        out["clevel"] = min(level, 9)
    return out
