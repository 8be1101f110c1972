"""Helpers shared by the built-in checks: locations and notes about unreadable chunks."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["fault_note", "first_index", "mass_at", "site_of"]


def site_of(lattice: tuple[int, ...], flat: int) -> int | list[int]:
    """A flat (C-order) site index as reports give it: an int in 1D, ``[y, x]`` in 2D.

    >>> site_of((4, 5), 7)
    [1, 2]
    """
    if len(lattice) <= 1:
        return int(flat)
    return [int(i) for i in np.unravel_index(int(flat), lattice)]


def first_index(mask: np.ndarray) -> tuple[int, ...] | None:
    """The first True position of ``mask`` in C order, or None."""
    if not mask.any():
        return None
    return tuple(int(i) for i in np.unravel_index(int(np.argmax(mask)), mask.shape))


def mass_at(run: Any, replica: int, snapshot: int, flat: int) -> Any:
    """The stored value at one (replica, snapshot, flat site); None if it cannot be read."""
    try:
        row = run.read(replica, snapshot, snapshot + 1)
        return row.reshape(-1)[flat].item()
    except Exception:  # a message detail only: the check's verdict does not depend on it
        return None


def fault_note(ctx: Any) -> str:
    """`` (N chunks unreadable: see integrity)`` when the pass lost chunks, else ``""``."""
    n = len(getattr(ctx, "faults", ()))
    if not n:
        return ""
    return f" ({n} unreadable chunk{'s' if n != 1 else ''} not examined: see integrity)"
