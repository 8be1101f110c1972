"""Parsing of ``--option key=value`` strings shared by the formats.

Every value arrives as a string; these helpers turn it into what a format needs and
raise :class:`~massarc.archive.ArchiveError` with "expected X; got Y" otherwise.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

import numpy as np

from ..errors import ArchiveError

__all__ = [
    "as_bool",
    "as_float",
    "as_int",
    "default_axes",
    "guard_options",
    "parse_axes",
    "parse_times",
]

_TRUE = {"1", "true", "yes", "on"}
_FALSE = {"0", "false", "no", "off"}


def guard_options(options: Mapping[str, str], known: Mapping[str, str], what: str) -> None:
    """Raise for an option ``what`` (e.g. "reading npz") does not understand."""
    for key in options:
        if key not in known and not (key.startswith("attrs.") and "attrs.NAME" in known):
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


def default_axes(ndim: int, lattice_ndim: int) -> tuple[str, ...] | None:
    """Axis names of a stored mass array: replica and time axes first, lattice last."""
    lat = ("site",) if lattice_ndim == 1 else ("y", "x")
    if ndim == lattice_ndim + 1:
        return ("time", *lat)
    if ndim == lattice_ndim + 2:
        return ("replica", "time", *lat)
    return None


def parse_axes(value: str, ndim: int, lattice_ndim: int, key: str = "order") -> tuple[str, ...]:
    """Validate an axis order such as ``time,replica,site``."""
    axes = tuple(a.strip() for a in str(value).split(",") if a.strip())
    lat = {"site"} if lattice_ndim == 1 else {"y", "x"}
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
