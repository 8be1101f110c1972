"""What the writer refuses to store: checks of one appended block, with the location of
the first offence in the message (snapshot, or (replica, snapshot, site))."""

from __future__ import annotations

import numpy as np

from .errors import DataError
from .layout import sentinel

__all__ = ["check_masses", "check_times"]


def check_times(name: str, t: np.ndarray, first: int, previous: float | None) -> None:
    """Times finite and strictly increasing, also across the previous block's last time.
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


def check_masses(
    name: str, m: np.ndarray, first: int, replica0: int, dtype: np.dtype | None
) -> None:
    """Masses ``(replica, time, *lattice)``: integers, non-negative, below the sentinel of
    ``dtype`` (when chosen). ``first`` and ``replica0`` locate ``m[0, 0]`` in the run."""
    where = None
    what = ""
    if m.dtype.kind == "f":
        bad = ~np.isfinite(m) | (m != np.round(m))
        if bad.any():
            where = np.unravel_index(int(np.argmax(bad)), m.shape)
            what = "is not an integer"
    elif m.dtype.kind not in "ui":
        raise DataError(f"{name}: expected integer masses; got dtype {m.dtype}")
    if where is None and m.dtype.kind in "fi" and m.size and m.min() < 0:
        where = np.unravel_index(int(np.argmax(m < 0)), m.shape)
        what = "is negative"
    limit = sentinel(dtype) if dtype is not None else None
    if where is None and limit is not None and m.size and m.max() >= limit:
        where = np.unravel_index(int(np.argmax(m >= limit)), m.shape)
        what = f"does not fit {dtype} (largest storable {limit - 1}; pass max_mass)"
    if where is not None:
        r, s, *site = (int(x) for x in where)
        site_txt = site[0] if len(site) == 1 else tuple(site)
        raise DataError(
            f"{name}: replica {replica0 + r}, snapshot {first + s}, site {site_txt}: "
            f"mass {m[where].item()} {what}"
        )
