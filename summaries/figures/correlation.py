"""The two-point function G(r, t) at chosen probes: against r, and against r / l(t).

Left panel: the stored ``correlation`` (G along the axis in 1D, the radial average in 2D)
of each chosen probe (gid ``probe-<index>``) at r = 0 .. min(sites) // 2 (on a ring
G(r) = G(L - r); between walls fewer than L / 2 pairs remain beyond it). Right panel, where
the coarsening length is meaningful: G(r, t) / G(0, t) against r / l(t), l the stored
``coarsening_length`` at the probe's snapshot (gid ``scaled-<index>``); a coarsening run
whose G follows one scaling function collapses there. The length is not meaningful in a run
started in the steady state (it does not grow) nor where no replica holds a condensate (it
is undefined); the caption says so and the panel is left out.

Probes: by default ``curves`` of them spread evenly over the stored probes (the first and
the last kept); with ``times``, the probe nearest to each time.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from massarc.archive import Run

from .shared import MASS_UNITS, FigureError, Stored, finish, new_figure, stored_of

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["NEEDS", "chosen_probes", "correlation_figure"]

NEEDS = ("correlation", "probe_time", "probe_snapshot", "coarsening_length")


def chosen_probes(probe_times: np.ndarray, times: Sequence[float] | None, curves: int) -> list[int]:
    """Indices of the probes to draw: ``curves`` spread evenly, or the nearest to ``times``.

    >>> chosen_probes(np.array([0.0, 10.0, 20.0, 30.0]), None, 3)
    [0, 2, 3]
    >>> chosen_probes(np.array([0.0, 10.0, 20.0, 30.0]), [12.0, 9.0, 100.0], 3)
    [1, 3]
    """
    n = len(probe_times)
    if times is None:
        return sorted({int(i) for i in np.linspace(0, n - 1, min(curves, n)).round()})
    picked = set()
    for t in times:
        if not np.isfinite(t):
            raise FigureError(f"times: expected finite times; got {t!r}")
        picked.add(int(np.abs(probe_times - t).argmin()))
    return sorted(picked)


def _scaling(stored: Stored, probes: list[int]) -> tuple[dict[int, float], str | None]:
    """l(t) at each probe where G against r / l(t) is meaningful, and the reason when it is
    nowhere meaningful."""
    growth = stored.attrs("coarsening_length").get("growth") or {}
    if growth.get("steady_start"):
        return {}, (
            "G against r / l(t) not drawn: the run starts in the steady state, l(t) does not grow"
        )
    length = stored["coarsening_length"][stored["probe_snapshot"]]
    g0 = stored["correlation"][:, 0]
    usable = {p: float(length[p]) for p in probes
              if np.isfinite(length[p]) and length[p] > 0 and g0[p] > 0}  # fmt: skip
    if not usable:
        return {}, (
            "G against r / l(t) not drawn: no replica holds a condensate at these times "
            "(l(t) undefined)"
        )
    return usable, None


def correlation_figure(
    run: Run | str | os.PathLike[str], *, times: Sequence[float] | None = None, curves: int = 4
) -> Figure:
    """G(r, t) against r at chosen times, and G / G(0) against r / l(t) where meaningful.

    Parameters
    ----------
    run
        A run whose summaries hold ``correlation`` at the probes and
        ``coarsening_length``, or its location.
    times
        Times (the run's units) to draw G at: the nearest stored probe to each. Default:
        ``curves`` probes spread over the run.
    curves
        Number of probes drawn by default.

    Returns
    -------
    matplotlib.figure.Figure
        One or two panels.
    """
    from matplotlib import colormaps

    run, stored = stored_of(run, NEEDS)
    g = stored["correlation"]
    probe_t = stored["probe_time"]
    probes = chosen_probes(probe_t, times, curves)
    lengths, why_not = _scaling(stored, probes)
    fig, axes = new_figure(1 if why_not else 2)
    units = run.meta.run.time_units
    r = np.arange(min(min(run.sites) // 2, g.shape[1] - 1) + 1)
    cmap = colormaps["viridis"]
    colours = {p: cmap(k / max(len(probes) - 1, 1) * 0.9) for k, p in enumerate(probes)}
    for p in probes:
        axes[0].plot(r, g[p, : len(r)], color=colours[p], lw=1.2,
                     label=f"t = {probe_t[p]:.4g} {units}", gid=f"probe-{p}")  # fmt: skip
    radial = " (radial average, bins round(|d|))" if len(run.sites) > 1 else ""
    axes[0].axhline(0.0, color="0.6", lw=0.6)
    axes[0].set_xlabel(f"distance r (sites){radial}")
    axes[0].set_ylabel(f"G(r, t) ({MASS_UNITS}²)")
    axes[0].legend(fontsize="small")
    details = []
    if why_not:
        details.append(why_not)
    else:
        ax = axes[1]
        for p, length in lengths.items():
            ax.plot(r / length, g[p, : len(r)] / g[p, 0], color=colours[p], lw=1.2,
                    label=f"t = {probe_t[p]:.4g} {units}, l = {length:.3g} sites",
                    gid=f"scaled-{p}")  # fmt: skip
        ax.axhline(0.0, color="0.6", lw=0.6)
        ax.set_xlabel("r / l(t) (dimensionless)")
        ax.set_ylabel("G(r, t) / G(0, t) (dimensionless)")
        ax.legend(fontsize="small")
        details.append("l(t): the stored coarsening length (mean spacing of condensates)")
        gaps = [f"{probe_t[p]:.4g}" for p in probes if p not in lengths]
        if gaps:
            details.append(f"no condensate (l undefined) at t = {', '.join(gaps)}: left panel only")
    if times is not None:
        details.append("the probe nearest to each time asked")
    return finish(fig, run, stored, details)
