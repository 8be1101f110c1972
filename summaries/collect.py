"""What the summaries are made from: one single pass, the probes, and the window.

:func:`single_pass` reads every chunk of the run once (:func:`massarc.archive.scan.scan`)
and feeds the registered statistics ``snapshots`` (largest mass, its site, sum of m^2,
occupied sites), ``histogram`` (occupation per block of snapshots), ``condensates`` and
``correlation`` (G at the probes). A chunk that cannot be read, or a statistic that
fails, stops the summaries with an :class:`~massarc.archive.ArchiveError` naming it:
summaries of a damaged run would silently be wrong (``massarc check`` locates the damage).

:func:`choose_window` takes the stationary window of the ``steady-state`` analysis
(:func:`massarc.validators.stationary_window`), else the last half of the run.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from massarc.archive import ArchiveError, Run
from massarc.archive.progress import Progress
from massarc.archive.scan import get_statistic, scan
from massarc.archive.stats.condensates import condensate_threshold
from massarc.archive.stats.correlation import even_indices

from .growth import geometric_points
from .options import SummaryOptions

__all__ = ["Collected", "choose_window", "probe_indices", "single_pass"]


def probe_indices(times: np.ndarray, count: int, spacing: str) -> np.ndarray:
    """Up to ``count`` snapshot indices: evenly spaced in index (``run``: the run's own
    sampling), nearest to evenly spaced times (``linear``) or to geometrically spaced
    positive times (``log``). The first and last snapshots are always kept.

    >>> probe_indices(np.array([0.0, 1, 2, 4, 8, 16, 32]), 4, "linear").tolist()
    [0, 4, 5, 6]
    """
    n = len(times)
    if spacing == "run" or n <= 2:
        return even_indices(n, count)
    if spacing == "log":
        picked = geometric_points(times, float(times[times > 0].min()), float(times[-1]), count)
    else:
        targets = np.linspace(times[0], times[-1], count)
        picked = np.abs(times[None, :] - targets[:, None]).argmin(axis=1)
    return np.unique(np.concatenate([[0, n - 1], picked])).astype(np.int64)


@dataclass(frozen=True)
class Collected:
    """The reduced results of the single pass, with the threshold and probes used."""

    snapshots: Any
    histogram: Any
    condensates: Any
    correlation: Any
    above: float
    rule: str
    probes: np.ndarray
    seconds: float


def single_pass(
    run: Run,
    options: SummaryOptions,
    *,
    workers: int | None = None,
    progress: Progress | None = None,
    scheduler: Any = None,
) -> Collected:
    """One read of every chunk feeding the four statistics the summaries need."""
    meta = run.meta
    if options.condensate_above is not None:
        above, rule = options.condensate_above, f"mass > {options.condensate_above:g} (given)"
    else:
        try:
            above, rule = condensate_threshold(meta, options.condensate_factor)
        except ValueError as exc:
            raise ArchiveError(f"{run.name}: {exc} (--set condensate_above=...)") from None
    probes = probe_indices(run.times, options.probes, options.probe_spacing)
    wanted: dict[str, dict[str, Any]] = {
        "snapshots": {},
        "histogram": {"bins": options.occupation_bins, "blocks": options.occupation_blocks},
        "condensates": {"above": above},
        "correlation": {"at": probes},
    }
    stats = {name: get_statistic(name)(run, **opts) for name, opts in wanted.items()}
    res = scan(run, stats, workers=workers, progress=progress, scheduler=scheduler)
    if res.faults:
        f = res.faults[0]
        raise ArchiveError(
            f"{run.name}: chunk {f.ref.key} (replica {f.ref.replica}, snapshots "
            f"{f.ref.start}..{f.ref.stop - 1}) is {f.kind}: {f.message}; summaries of a "
            "damaged run would be wrong (run massarc check)"
        )
    if res.errors:
        name, message = next(iter(res.errors.items()))
        raise ArchiveError(f"{run.name}: statistic {name!r} failed: {message}")
    out = res.results
    return Collected(
        out["snapshots"], out["histogram"], out["condensates"], out["correlation"],
        float(above), rule, probes, res.seconds,
    )  # fmt: skip


def choose_window(run: Run, snapshots: Any, rule: str) -> dict[str, Any]:
    """The window of the occupation law, the extreme values and the condensate.

    ``rule`` is ``stationary`` (the stationary window when one is found, else the last
    half), ``last-half`` or ``all``. The stride (snapshots between nearly independent
    draws) comes from the window analysis: ceil of the largest integrated
    autocorrelation g of the largest mass, sum of m^2 and occupied sites in its window.
    """
    from massarc.validators import CheckContext, stationary_window

    n = run.n_snapshots
    ctx = CheckContext(run, run.meta, {"snapshots": snapshots}, {})
    window = stationary_window(ctx)
    stride = int(window.stride) if window.start is not None else 1
    if rule == "stationary" and window.found and window.start is not None:
        start, used, why = int(window.start), "stationary", window.reason
    elif rule == "all":
        start, used, why = 0, "all", "the whole run, as asked"
    else:
        start, used = n // 2, "last-half"
        why = "the last half, as asked" if rule == "last-half" else (
            f"no stationary window ({window.reason}): the last half"
        )  # fmt: skip
    return {
        "rule": used,
        "start": start,
        "snapshots": n - start,
        "start_time": float(run.times[start]) if n else None,
        "stride": max(1, stride),
        "stationary_found": bool(window.found),
        "reason": why,
    }
