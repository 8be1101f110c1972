"""The largest mass over time: its mean and its variance over replicas, with the stored
bootstrap intervals as bands.

Left panel: ``largest_mass_mean`` at every snapshot (gid ``mean``) and the interval
``largest_mass_mean_ci`` at the probes (gid ``band``); right panel: ``largest_mass_var``
(gid ``variance``) and ``largest_mass_var_ci`` (gid ``band``). A dotted vertical line marks
where the window starts (gid ``window-start``) when it is not the whole run. With
``log=True`` both axes of both panels are logarithmic (points at t = 0 or of value 0 are
then not shown). In a coarsening run the variance rises while condensates merge and falls
as the replicas approach the single-condensate state.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING

import numpy as np

from massarc.archive import Run

from .shared import MASS_UNITS, finish, new_figure, stored_of, time_label

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["NEEDS", "largest_mass_figure"]

#: The stored arrays this figure reads.
NEEDS = (
    "largest_mass_mean",
    "largest_mass_var",
    "probe_time",
    "largest_mass_mean_ci",
    "largest_mass_var_ci",
)


def largest_mass_figure(run: Run | str | os.PathLike[str], *, log: bool = False) -> Figure:
    """Mean and variance over replicas of the largest mass against time, with their
    bootstrap intervals.

    Parameters
    ----------
    run
        A run whose summaries hold the mean and variance of the largest mass
        and their intervals, or its location.
    log
        Logarithmic time and value axes.

    Returns
    -------
    matplotlib.figure.Figure
        Two panels: mean (left) and variance (right).
    """
    run, stored = stored_of(run, NEEDS)
    times = np.asarray(run.times)
    probe_t = stored["probe_time"]
    confidence = stored.attrs("largest_mass_mean_ci").get("confidence")
    level = f"{100 * confidence:g} % bootstrap interval" if confidence else "bootstrap interval"
    fig, (left, right) = new_figure(2)
    panels = [
        (left, "largest_mass_mean", "mean", f"mean largest mass ({MASS_UNITS})", "C0"),
        (right, "largest_mass_var", "variance",
         f"variance of the largest mass ({MASS_UNITS}²)", "C1"),
    ]  # fmt: skip
    window = stored.window
    start_time = window.get("start_time")
    for ax, name, gid, ylabel, colour in panels:
        ax.plot(times, stored[name], color=colour, lw=1.2, label=f"{gid} over replicas",
                gid=gid)  # fmt: skip
        ci = stored[f"{name}_ci"]
        ax.fill_between(probe_t, ci[:, 0], ci[:, 1], color=colour, alpha=0.25, lw=0,
                        label=f"{level} (at the probes)", gid="band")  # fmt: skip
        if window.get("rule") not in (None, "all") and start_time:
            ax.axvline(start_time, color="0.4", ls=":", lw=1, label="window start",
                       gid="window-start")  # fmt: skip
        if log:
            ax.set_xscale("log")
            ax.set_yscale("log")
        ax.set_xlabel(time_label(run))
        ax.set_ylabel(ylabel)
        ax.legend(fontsize="small")
    n_rep = stored.provenance.get("extent", {}).get("replicas", run.n_replicas)
    details = [f"{n_rep} replicas", "log axes" if log else ""]
    return finish(fig, run, stored, details)
