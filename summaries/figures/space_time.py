"""The space-time picture: one replica's masses, time running down and sites across.

Unlike the other figures it reads masses, but only the stretch it shows: snapshots
``start .. stop - 1`` of one replica, every ``step``-th of them so that at most ``rows``
rows are read (a huge run stays cheap). In 1D the rows form a kymograph (gid
``masses``, a :class:`~matplotlib.collections.QuadMesh` whose rows are the snapshots
read); its time axis is logarithmic when the run is sampled geometrically in time. In 2D
up to six snapshots of the stretch, evenly spread, are shown side by side (gid
``snapshot-<index>``). The colour map is cividis (perceptually uniform, readable in grey
and by colour-blind readers) from 0 to the largest mass shown, with a colour bar in mass
units. Stored summaries are not needed; when present, the caption names their window.
"""

from __future__ import annotations

import math
import os
from typing import TYPE_CHECKING

import numpy as np

from massarc.archive import Run

from .shared import MASS_UNITS, FigureError, Stored, finish, new_figure, open_target, time_label

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["COLOUR_MAP", "PANELS_2D", "ROWS", "space_time_figure", "time_edges"]

#: Default largest number of snapshots read.
ROWS = 512
#: Largest number of snapshots shown for a 2D lattice.
PANELS_2D = 6
#: A perceptually uniform colour map.
COLOUR_MAP = "cividis"


def _geometric(times: np.ndarray) -> bool:
    """Whether the times look geometrically spaced (then a log time axis shows them evenly)."""
    if len(times) < 3 or times[0] <= 0 or times[-1] / times[0] < 100:
        return False
    steps, log_steps = np.diff(times), np.diff(np.log(times))
    return bool(log_steps.std() / log_steps.mean() < steps.std() / steps.mean())


def time_edges(times: np.ndarray, geometric: bool) -> np.ndarray:
    """Row edges around each time: midpoints (geometric means on a log axis), the ends
    half a step out.

    >>> time_edges(np.array([0.0, 2.0, 4.0]), False).tolist()
    [-1.0, 1.0, 3.0, 5.0]
    >>> time_edges(np.array([1.0, 100.0]), True).round(6).tolist()
    [0.1, 10.0, 1000.0]
    """
    t = np.asarray(times, dtype=np.float64)
    if len(t) == 1:
        return t[0] * np.array([0.9, 1.1]) if geometric else t[0] + np.array([-0.5, 0.5])
    if geometric:
        return np.exp(time_edges(np.log(t), False))
    mid = (t[1:] + t[:-1]) / 2
    return np.concatenate([[2 * t[0] - mid[0]], mid, [2 * t[-1] - mid[-1]]])


def _stretch(run: Run, replica: int, start: int | None, stop: int | None) -> tuple[int, int]:
    n = run.n_snapshots
    if not 0 <= replica < run.n_replicas:
        raise FigureError(f"{run.name}: replica {replica}: expected 0 .. {run.n_replicas - 1}")
    a = 0 if start is None else start
    b = n if stop is None else stop
    if not 0 <= a < b <= n:
        raise FigureError(
            f"{run.name}: snapshots {a}:{b}: expected first:last with 0 <= first < last <= {n}"
        )
    return a, b


def space_time_figure(
    run: Run | str | os.PathLike[str],
    *,
    replica: int = 0,
    start: int | None = None,
    stop: int | None = None,
    rows: int = ROWS,
) -> Figure:
    """One replica's masses over a stretch of snapshots.

    Parameters
    ----------
    run
        A run (summaries optional), or its location.
    replica
        The replica shown.
    start, stop
        The stretch: snapshots ``start .. stop - 1`` (default: the whole run).
    rows
        At most this many snapshots are read (every ``ceil(length / rows)``-th).

    Returns
    -------
    matplotlib.figure.Figure
        A kymograph (1D) or a grid of snapshots (2D), with a colour bar.
    """
    run = open_target(run)
    if rows < 1:
        raise FigureError(f"rows: expected an integer >= 1; got {rows}")
    a, b = _stretch(run, replica, start, stop)
    summaries = run.summaries
    stored = None if summaries is None else Stored(run, summaries)
    units = run.meta.run.time_units
    if len(run.sites) == 1:
        step = math.ceil((b - a) / rows)
        picked = np.arange(a, b, step)
        masses = np.asarray(run.mass[replica, a:b:step])
        fig, (ax,) = new_figure(1)
        fig.set_size_inches(7.0, 5.0)
        geometric = _geometric(run.times[picked])
        edges = time_edges(run.times[picked], geometric)
        sites = np.arange(run.sites[0] + 1) - 0.5
        mesh = ax.pcolormesh(sites, edges, masses, cmap=COLOUR_MAP, vmin=0,
                             vmax=max(1, int(masses.max())), gid="masses")  # fmt: skip
        if geometric:
            ax.set_yscale("log")
        ax.set_ylim(edges[-1], edges[0])  # time runs down
        ax.set_xlabel("site (sites)")
        ax.set_ylabel(time_label(run) + (", log scale" if geometric else ""))
        mappable, holders = mesh, [ax]
        shown = f"every {step} snapshots ({len(picked)} rows)" if step > 1 else "every snapshot"
    else:
        count = min(PANELS_2D, rows, b - a)
        picked = np.unique(np.linspace(a, b - 1, count).round().astype(np.int64))
        masses = np.asarray(run.mass.get_orthogonal_selection((replica, picked)))
        cols = min(3, len(picked))
        fig, axes = new_figure(cols, rows=math.ceil(len(picked) / cols))
        top = max(1, int(masses.max()))
        holders = []
        for k, ax in enumerate(axes):
            if k >= len(picked):
                fig.delaxes(ax)
                continue
            mappable = ax.imshow(masses[k], cmap=COLOUR_MAP, vmin=0, vmax=top,
                                 interpolation="nearest", gid=f"snapshot-{picked[k]}")  # fmt: skip
            ax.set_title(f"t = {run.times[picked[k]]:.4g} {units}", fontsize="small")
            ax.set_xlabel("site x (sites)")
            ax.set_ylabel("site y (sites)")
            holders.append(ax)
        shown = f"{len(picked)} snapshots spread over the stretch"
    fig.colorbar(mappable, ax=holders, label=f"mass per site ({MASS_UNITS})")
    t_a, t_b = run.times[a], run.times[b - 1]
    details = [f"replica {replica}, snapshots {a}..{b - 1} (t = {t_a:.4g} .. {t_b:.4g} {units})",
               shown]  # fmt: skip
    return finish(fig, run, stored, details)
