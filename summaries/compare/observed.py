"""What ``compare`` reads of one run: its stationary observables and their effective sizes.

The observables come from the run's stored summaries (``massarc summarize``) when they are
up to date (same committed extent); otherwise they are computed in memory by the same
single pass and window as ``summarize`` and *not* written (the inputs of a comparison are
never modified). Either way the window is the summaries' window: the stationary window of
the ``steady-state`` analysis when one was found.

Effective sizes (the validators' machinery, :mod:`massarc.validators.analysis.diagnostics`):
per observable of the window (largest mass, sum of m^2, occupied sites, over replicas x
snapshots), the bulk and tail ESS of the rank-normalised series (Vehtari et al. 2021).
``efficiency`` is the smallest ESS / draws over the three, as in the window's own
``efficiency``; the occupation counts are scaled by it. The largest mass uses its own
smallest of bulk and tail ESS. The probes of G(r) in the window are taken as
``probes / max(1, stride / gap)`` independent draws, with ``stride`` (ceil of the largest
statistical inefficiency of the window, in snapshots) and ``gap`` (mean snapshots between
probes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.archive import Run
from massarc.archive.summaries import plain
from massarc.validators.analysis.diagnostics import ess_bulk, ess_tail

from ..api import _refuse
from ..build import build_summaries
from ..collect import choose_window, single_pass
from ..options import SummaryOptions

__all__ = ["Observed", "effective_draws", "observe"]

#: The window observables, stored name -> plain name.
SERIES = {"largest_mass": "largest mass", "second_moment": "sum of m^2",
          "occupied": "occupied sites"}  # fmt: skip


def effective_draws(window: np.ndarray) -> float:
    """Effective number of independent draws of a (replica, snapshot) series: the smaller
    of its bulk and tail ESS, at most the number of draws; NaN for a constant series
    (every draw then says the same, and there is nothing to weigh).

    >>> rng = np.random.default_rng(1)
    >>> x = rng.normal(size=(4, 500))
    >>> 1000 < effective_draws(x) <= 2000
    True
    >>> 1500 < effective_draws(np.repeat(x, 10, axis=1)) < 2500   # each repeated 10 times
    True
    """
    w = np.asarray(window, dtype=np.float64)
    if w.size == 0 or np.ptp(w) == 0:
        return float("nan")
    ess = min(float(ess_bulk(w)), float(ess_tail(w)))
    return float(min(max(ess, 0.0), w.size)) if math.isfinite(ess) else float("nan")


@dataclass(frozen=True)
class Observed:
    """One run's stationary observables, as ``compare`` uses them.

    Attributes
    ----------
    name
        The run's name.
    source
        ``stored`` (the summaries group) or ``computed`` (in memory, not written).
    window
        The summaries' window (rule, start, snapshots, stride, stationary_found, reason).
    largest
        Largest mass per (replica, snapshot) inside the window.
    largest_draws
        Effective draws of ``largest`` (:func:`effective_draws`).
    efficiency
        Smallest effective draws / draws over the window observables (NaN if all constant).
    occupation
        Occupation counts over the window and replicas (last bin: every larger mass).
    correlation
        G(r) at the probes inside the window, shape (probe, r); ``probe_gap`` the mean
        snapshots between them; ``probe_draws`` their effective number.
    """

    name: str
    source: str
    window: dict[str, Any]
    largest: np.ndarray
    largest_draws: float
    efficiency: float
    occupation: np.ndarray
    correlation: np.ndarray
    probe_gap: float
    probe_draws: float

    @property
    def stationary(self) -> bool:
        """Whether the summaries' window is a stationary window that was found."""
        return self.window.get("rule") == "stationary" and bool(self.window.get("stationary_found"))


def _arrays(run: Run) -> tuple[str, dict[str, np.ndarray], dict[str, Any]]:
    """The needed arrays and the window: stored when up to date, else computed here."""
    names = ("largest_mass", "second_moment", "occupied", "occupation", "correlation",
             "probe_snapshot")  # fmt: skip
    stored = run.summaries
    extent = {"replicas": run.n_replicas, "snapshots": run.n_snapshots}
    if (
        stored is not None
        and stored.provenance.get("extent") == extent
        and all(n in stored for n in names)
    ):
        window = dict(stored.provenance["window"])
        return "stored", {n: stored.array(n) for n in names}, window
    opts = SummaryOptions()
    col = single_pass(run, opts)
    window = choose_window(run, col.snapshots, opts.window)
    arrays, _ = build_summaries(run, opts, col, window)
    return "computed", {n: np.asarray(arrays[n].data) for n in names}, plain(window)


def observe(run: Run) -> Observed:
    """The stationary observables of ``run`` and their effective sizes.

    Raises :class:`~massarc.archive.ArchiveError` for a run that is being written, holds
    no snapshot, or has a damaged chunk (summaries of it would be wrong).
    """
    _refuse(run)
    source, arrays, window = _arrays(run)
    start = int(window["start"])
    series = {k: np.asarray(arrays[k], dtype=np.float64)[:, start:] for k in SERIES}
    draws = {k: effective_draws(w) for k, w in series.items()}
    ratios = [d / series[k].size for k, d in draws.items() if math.isfinite(d)]
    efficiency = min(ratios) if ratios else float("nan")
    probes = np.asarray(arrays["probe_snapshot"], dtype=np.int64)
    inside = probes >= start
    corr = np.asarray(arrays["correlation"], dtype=np.float64)[inside]
    gap = float(np.diff(probes[inside]).mean()) if inside.sum() > 1 else float("nan")
    stride = max(1, int(window.get("stride") or 1))
    spread = max(1.0, stride / gap) if math.isfinite(gap) and gap > 0 else 1.0
    return Observed(
        name=run.name,
        source=source,
        window=window,
        largest=series["largest_mass"],
        largest_draws=draws["largest_mass"],
        efficiency=float(efficiency),
        occupation=np.asarray(arrays["occupation"], dtype=np.int64),
        correlation=corr,
        probe_gap=gap,
        probe_draws=float(len(corr) / spread),
    )
