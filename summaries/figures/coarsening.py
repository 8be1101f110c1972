"""Coarsening: the typical condensate mass and the coarsening length against time, on
log-log axes, with the stored growth fits and the expected power law t^(1/z).

Left panel: ``typical_mass_mean`` (sum m^2 / sum m, replica mean; gid ``data``); right
panel: ``coarsening_length`` l(t) (gid ``data``). On each, the fit stored in the array's
``growth`` attribute (gid ``fit``): the power law t^alpha with the stored exponent alpha,
drawn over the stored fitting range [start, stop], its amplitude the least-squares
intercept on log-log at the fit's own snapshots (the up to ``fit_points`` snapshots nearest
to geometrically spaced times, :func:`massarc.summaries.growth.geometric_points`, where
every replica's ``typical_mass``, or ``condensates`` for the length, is positive); and the
expected law t^(1/z) (gid ``expected``; z = 3 symmetric ZRP, 2 driven ZRP and CMAM)
through the same centre. A run started in the steady state has no growth to measure: its
lines are not drawn and the caption says so; a fitting range flagged too short is marked
in the legend.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any

import numpy as np

from massarc.archive import Run

from ..growth import geometric_points
from .shared import MASS_UNITS, finish, fmt, new_figure, stored_of, time_label

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = ["NEEDS", "coarsening_figure", "fit_centre"]

NEEDS = ("typical_mass_mean", "coarsening_length", "typical_mass", "condensates")

#: Default number of fit snapshots (the summaries' option ``fit_points``) for summaries
#: that do not record it.
_FIT_POINTS = 64


def fit_centre(
    times: np.ndarray, values: np.ndarray, fit: dict[str, Any], points: int, usable: np.ndarray
) -> tuple[float, float] | None:
    """(mean log t, mean log y) over the fit's snapshots inside its range (None when
    fewer than two are usable): a least-squares line of any slope goes through it.

    ``usable`` marks the snapshots the fit could use (every replica positive there).
    """
    start, stop = fit.get("start"), fit.get("stop")
    if start is None or stop is None:
        return None
    idx = geometric_points(times, float(start), float(stop), points)
    idx = idx[usable[idx]]
    y = np.asarray(values, dtype=np.float64)[idx]
    keep = np.isfinite(y) & (y > 0)
    if keep.sum() < 2:
        return None
    return float(np.log(times[idx][keep]).mean()), float(np.log(y[keep]).mean())


def _lines(ax: Axes, times: np.ndarray, values: np.ndarray, fit: dict[str, Any],
           points: int, usable: np.ndarray) -> str | None:  # fmt: skip
    """Draw the fitted and the expected power laws; the reason when they are not drawn."""
    if fit.get("steady_start"):
        return "no growth to measure (the run starts in the steady state)"
    alpha = fit.get("exponent")
    centre = fit_centre(times, values, fit, points, usable)
    if alpha is None or centre is None:
        return f"no fit ({fit.get('note', 'none stored')})"
    log_t0, log_y0 = centre
    t = np.geomspace(float(fit["start"]), float(fit["stop"]), 32)
    short = " (range too short)" if fit.get("too_short") else ""
    ax.plot(t, np.exp(log_y0 + alpha * (np.log(t) - log_t0)), "-", color="C3", lw=1.5,
            label=f"fit: t^{alpha:.3f} ± {fmt(fit.get('stderr'), 2)}{short}",
            gid="fit")  # fmt: skip
    expected = fit.get("expected")
    if expected is not None:
        ax.plot(t, np.exp(log_y0 + expected * (np.log(t) - log_t0)), "--", color="0.3", lw=1,
                label=f"expected: t^(1/z), 1/z = {expected:.3g}", gid="expected")  # fmt: skip
    return None


def coarsening_figure(run: Run | str | os.PathLike[str]) -> Figure:
    """Typical condensate mass and coarsening length against time, with their growth fits.

    Parameters
    ----------
    run
        A run whose summaries hold ``typical_mass_mean``, ``coarsening_length``
        and their growth fits, or its location.

    Returns
    -------
    matplotlib.figure.Figure
        Two log-log panels: typical mass (left) and coarsening length (right).
    """
    run, stored = stored_of(run, NEEDS)
    times = np.asarray(run.times)
    points = int(stored.options.get("fit_points", _FIT_POINTS))
    fig, axes = new_figure(2)
    panels = [
        ("typical_mass_mean", "typical_mass", f"typical mass Σm²/Σm ({MASS_UNITS})",
         "typical mass"),
        ("coarsening_length", "condensates", "coarsening length l(t) (sites)", "l(t)"),
    ]  # fmt: skip
    details = []
    for ax, (name, per_replica, ylabel, short) in zip(axes, panels, strict=True):
        values = stored[name]
        ax.plot(times, values, color="C0", lw=1.2, label=f"{short}, mean over replicas",
                gid="data")  # fmt: skip
        each = stored[per_replica].astype(np.float64)
        usable = np.all(np.isfinite(each) & (each > 0), axis=0)
        why = _lines(ax, times, values, stored.attrs(name).get("growth") or {}, points, usable)
        if why:
            details.append(f"{short}: {why}")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel(time_label(run))
        ax.set_ylabel(ylabel)
        ax.legend(fontsize="small")
    threshold = stored.provenance.get("threshold", {}).get("rule")
    if threshold:
        details.append(f"condensate: {threshold}")
    return finish(fig, run, stored, details)
