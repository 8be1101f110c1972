"""The event loop: many attempted moves on one replica, with pre-drawn random numbers.

One Python function, :func:`event_loop_py`, is the whole algorithm. With numba installed
it is compiled as it stands (``njit(cache=True, nogil=True)``); without numba, or with the
environment variable ``MASSARC_PURE=1``, the very same function runs in the interpreter.
Both consume the same arrays of uniforms and do the same IEEE arithmetic, so the compiled
and pure paths give bit-identical trajectories.

Each attempt ``i`` uses one site index ``picks[i]`` (uniform over the lattice) and one
uniform ``unif[i]`` in [0, 1). With ``x = unif[i] * rate_max``:

* ``x >= hop_max`` (open axes only; closed lattices have ``rate_max == hop_max``): a
  reservoir attempt. ``y = x - hop_max`` picks an open axis (``y // (alpha + beta)``) and
  then injection (the first ``alpha`` of its slot: one unit enters the site if it is at
  position 0 along that axis) or extraction (one unit leaves the site if it is at the last
  position along that axis and not empty);
* ZRP (``family == 0``): the move happens when ``x < u(m)``; then ``v = x / u(m)`` is again
  uniform in [0, 1) and chooses the direction;
* CMAM (``family == 1``): ``x < D`` moves the whole mass (``v = x / D``), otherwise one unit
  chips off (``v = (x - D) / w``).

In 1D the move goes to the +1 neighbour when ``v < right_probability``; in 2D ``2 v`` picks the axis
(its integer part) and the direction (its fraction against ``right_probability``). A move towards a
reflecting wall (or the end of an open axis) has neighbour -1 in the table and is
suppressed: the mass stays.

On request (``track``) the loop also counts, move by move, the net mass moved across every
bond: ``flow[axis * N + s]`` is the mass moved from site ``s`` to its +1 neighbour along
``axis`` minus the mass moved back (the seam bond of a periodic axis is the one of its last
site), and ``io`` the cumulative units injected and extracted.
"""

from __future__ import annotations

import functools
import importlib.util
import os
from collections.abc import Callable

import numpy as np

__all__ = [
    "CMAM",
    "HAVE_NUMBA",
    "ZRP",
    "event_loop",
    "event_loop_py",
    "neighbour_table",
    "use_pure",
]

ZRP = 0
CMAM = 1

#: True when numba can be imported (it is only imported when a kernel is first needed).
HAVE_NUMBA = importlib.util.find_spec("numba") is not None


def event_loop_py(
    mass: np.ndarray,
    out: np.ndarray,
    nbr: np.ndarray,
    ndim: int,
    right_probability: float,
    family: int,
    rates: np.ndarray,
    rate_max: float,
    diffusion: float,
    chipping: float,
    picks: np.ndarray,
    unif: np.ndarray,
    stops: np.ndarray,
    hop_max: float,
    alpha: float,
    beta: float,
    open_axes: np.ndarray,
    strides: np.ndarray,
    lengths: np.ndarray,
    track: bool,
    flow: np.ndarray,
    flow_out: np.ndarray,
    io: np.ndarray,
    io_out: np.ndarray,
) -> None:
    """Perform ``len(picks)`` attempts on ``mass`` (flat, int64), in place.

    ``stops`` (sorted, values in 0..len(picks)) says when to record: ``out[j]`` receives a
    copy of ``mass`` just before attempt ``stops[j]`` (after the last one when
    ``stops[j] == len(picks)``). ``rates`` holds u(0..K) with u(k) = u(K) beyond K.

    Open axes: ``open_axes`` lists them; ``strides`` and ``lengths`` give the flat stride and
    length of every axis; ``rate_max = hop_max + len(open_axes) * (alpha + beta)``. ``io``
    (2,) counts the units injected and extracted so far; at each stop ``io_out[j]`` receives
    it (when ``track``).

    When ``track``: ``flow`` (``ndim * N``) accumulates the net transfer across every bond
    since the last stop; at each stop it is copied to ``flow_out[j]`` and reset.
    """
    n = len(picks)
    n_rec = len(stops)
    top = len(rates) - 1
    n_sites = len(mass)
    slot = alpha + beta
    j = 0
    for i in range(n):
        while j < n_rec and stops[j] == i:
            out[j, :] = mass
            if track:
                flow_out[j, :] = flow
                flow[:] = 0
                io_out[j, :] = io
            j += 1
        s = picks[i]
        m = mass[s]
        x = unif[i] * rate_max
        if x >= hop_max and len(open_axes) > 0:  # a reservoir attempt (open axes only)
            y = x - hop_max
            k = int(y / slot)
            if k >= len(open_axes):
                k = len(open_axes) - 1  # y rounded up to the top: keep the index in range
            ax = open_axes[k]
            pos = (s // strides[ax]) % lengths[ax]
            if y - k * slot < alpha:
                if pos == 0:
                    mass[s] = m + 1
                    io[0] += 1
            elif m > 0 and pos == lengths[ax] - 1:
                mass[s] = m - 1
                io[1] += 1
            continue
        if m == 0:
            continue
        if family == 0:
            r = rates[m] if m < top else rates[top]
            if x >= r:
                continue
            v = x / r
            amount = 1
        elif x < diffusion:
            v = x / diffusion
            amount = m
        else:
            v = (x - diffusion) / chipping
            amount = 1
        if ndim == 1:
            col = 1 if v < right_probability else 0
        else:
            v2 = v * 2.0
            axis = int(v2)
            if axis > 1:
                axis = 1  # v rounded up to 1.0: keep the index in range
            col = 2 * axis + (1 if v2 - axis < right_probability else 0)
        t = nbr[s, col]
        if t < 0:
            continue
        mass[s] = m - amount
        mass[t] += amount
        if track:
            if col % 2 == 1:  # towards +1: the bond of the source site
                flow[(col // 2) * n_sites + s] += amount
            else:  # towards -1: the bond of the target site, crossed backwards
                flow[(col // 2) * n_sites + t] -= amount
    while j < n_rec:
        out[j, :] = mass
        if track:
            flow_out[j, :] = flow
            flow[:] = 0
            io_out[j, :] = io
        j += 1


@functools.cache
def _compiled() -> Callable[..., None]:
    import numba

    return numba.njit(cache=True, nogil=True)(event_loop_py)


def use_pure(pure: bool | None = None) -> bool:
    """Whether the pure-Python loop runs: ``pure`` if given, else ``MASSARC_PURE=1`` or no
    numba."""
    if pure is not None:
        if not pure and not HAVE_NUMBA:
            raise ImportError("expected numba for the compiled event loop; got none installed")
        return pure
    return os.environ.get("MASSARC_PURE", "") == "1" or not HAVE_NUMBA


def event_loop(pure: bool | None = None) -> Callable[..., None]:
    """The event loop to call: compiled with numba, or :func:`event_loop_py` itself."""
    return event_loop_py if use_pure(pure) else _compiled()


def neighbour_table(sites: list[int], boundary: list[str]) -> np.ndarray:
    """``nbr[s, 2 * axis + d]``: the flat index of the neighbour of site ``s`` one step along
    ``axis`` (d = 0: -1, d = 1: +1), or -1 where a reflecting wall (or the end of an open
    axis, where only the reservoirs act) suppresses the move.

    Sites are numbered in array order (2D: ``y * Lx + x``).

    >>> neighbour_table([3], ["reflecting"]).tolist()
    [[-1, 1], [0, 2], [1, -1]]
    """
    shape = tuple(sites)
    index = np.arange(int(np.prod(shape)), dtype=np.int64).reshape(shape)
    cols = []
    for axis, (length, bound) in enumerate(zip(shape, boundary, strict=True)):
        for step in (-1, 1):
            moved = np.roll(index, -step, axis=axis)
            if bound in ("reflecting", "open"):
                edge = [slice(None)] * len(shape)
                edge[axis] = 0 if step == -1 else length - 1
                moved[tuple(edge)] = -1
            cols.append(moved.reshape(-1))
    return np.ascontiguousarray(np.stack(cols, axis=1))
