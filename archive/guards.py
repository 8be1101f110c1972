"""What the writer refuses to store: guards of one append, with the location of the first
offence in the message (snapshot, or (replica, snapshot, site))."""

from __future__ import annotations

import numpy as np

from .errors import DataError
from .layout import sentinel

__all__ = ["first_bad_mass", "guard_masses", "guard_times"]


def guard_times(name: str, t: np.ndarray, first: int, previous: float | None) -> None:
    """Times finite and strictly increasing, also across the previous append's last time.
    ``first`` is the snapshot index of ``t[0]``."""
    if not np.all(np.isfinite(t)):
        i = int(np.argmin(np.isfinite(t)))
        raise DataError(f"{name}: snapshot {first + i}: time {float(t[i])} is not finite")
    seq = t if previous is None else np.concatenate([[previous], t])
    steps = np.diff(seq)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0))
        index = first + i + (1 if previous is None else 0)
        raise DataError(
            f"{name}: snapshot {index}: time {float(seq[i + 1])} is not after the "
            f"previous {float(seq[i])}"
        )


def first_bad_mass(
    m: np.ndarray, limit: int | None, too_large: str
) -> tuple[tuple[int, ...], str] | None:
    """Index and reason of the first mass that cannot be stored: not an integer, negative,
    or ``>= limit`` (then the reason is ``too_large``); None when every mass is fine.
    Raises :class:`DataError` for a dtype that cannot hold masses at all."""
    if not m.size:
        return None
    kind = m.dtype.kind
    if kind == "f":
        bad = ~np.isfinite(m) | (m != np.round(m))
        if bad.any():
            return tuple(int(i) for i in np.unravel_index(int(np.argmax(bad)), m.shape)), (
                "is not an integer"
            )
    elif kind not in "ui":
        raise DataError(f"expected integer masses; got dtype {m.dtype}")
    if kind in "if" and m.min() < 0:
        return tuple(int(i) for i in np.unravel_index(int(np.argmax(m < 0)), m.shape)), (
            "is negative"
        )
    if limit is not None and m.max() >= limit:
        idx = np.unravel_index(int(np.argmax(m >= limit)), m.shape)
        return tuple(int(i) for i in idx), too_large
    return None


def guard_masses(
    name: str, m: np.ndarray, first: int, replica0: int, dtype: np.dtype | None
) -> None:
    """Masses ``(replica, time, *lattice)``: integers, non-negative, below the sentinel of
    ``dtype`` (when chosen). ``first`` and ``replica0`` locate ``m[0, 0]`` in the run."""
    limit = sentinel(dtype) if dtype is not None else None
    try:
        found = first_bad_mass(
            m, limit, f"does not fit {dtype} (largest storable {(limit or 0) - 1}; pass max_mass)"
        )
    except DataError as exc:
        raise DataError(f"{name}: {exc}") from None
    if found is not None:
        (r, s, *site), what = found
        site_txt = site[0] if len(site) == 1 else tuple(site)
        raise DataError(
            f"{name}: replica {replica0 + r}, snapshot {first + s}, site {site_txt}: "
            f"mass {m[found[0]].item()} {what}"
        )
