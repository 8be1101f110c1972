"""``summarize``: compute the observables of runs in one pass each and store them.

Every run is checked before any is written (a valid header, a complete run with data),
so that bad input modifies nothing. A run whose stored summaries were made with the same
options from the same committed extent is left as it is (idempotent); ``force``
recomputes. Storing never touches ``mass``, ``time`` or the header.
"""

from __future__ import annotations

import os
import time
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from massarc.archive import ArchiveError, Run, open_runs
from massarc.archive.distributed import over_runs
from massarc.archive.progress import Progress
from massarc.archive.summaries import Summaries, hold_summaries, plain, write_summaries

from .build import build_summaries
from .collect import choose_window, single_pass
from .options import SummaryOptions

__all__ = [
    "SummaryOutcome",
    "open_for_summaries",
    "summarize",
    "summarize_in_memory",
    "summarize_run",
]


@dataclass(frozen=True)
class SummaryOutcome:
    """One run's summaries: as stored now, whether they were computed this time, the
    seconds it took and, when computed, the seconds of the single pass alone."""

    run: Run
    summaries: Summaries
    computed: bool
    seconds: float
    pass_seconds: float | None = None

    @property
    def findings(self) -> dict[str, Any]:
        """The group attributes: provenance and the scalar findings."""
        return self.summaries.provenance


def _refuse(run: Run) -> None:
    if run.meta is None:  # pragma: no cover - open_runs is strict here
        raise ArchiveError(f"{run.name}: no valid metadata")
    if not run.complete:
        raise ArchiveError(
            f"{run.name}: the run is being written (state.complete is false); summarize it "
            "once its writer has finished"
        )
    if not run.has_data:
        raise ArchiveError(f"{run.name}: the run holds no committed snapshot")


def open_for_summaries(location: str | os.PathLike[str] | Any) -> list[Run]:
    """Open a run or a collection and refuse what cannot be summarised
    (:class:`~massarc.archive.ArchiveError`, :class:`~massarc.schema.MetadataError`)."""
    try:
        runs = open_runs(location)
    except (ArchiveError, ValueError):
        raise
    except OSError as exc:
        raise ArchiveError(f"{location}: {exc.strerror or exc}") from None
    for run in runs:
        _refuse(run)
    return runs


def _up_to_date(run: Run, stored: Summaries | None, opts: SummaryOptions) -> bool:
    if stored is None:
        return False
    prov = stored.provenance
    extent = {"replicas": run.n_replicas, "snapshots": run.n_snapshots}
    return prov.get("options") == plain(opts.as_dict()) and prov.get("extent") == extent


def summarize_run(
    run: Run,
    options: SummaryOptions | Mapping[str, Any] | None = None,
    *,
    force: bool = False,
    workers: int | None = None,
    progress: Progress | None = None,
    scheduler: Any = None,
) -> SummaryOutcome:
    """Compute and store the summaries of one run (see :func:`summarize`)."""
    started = time.perf_counter()
    opts = options if isinstance(options, SummaryOptions) else SummaryOptions.from_mapping(options)
    _refuse(run)
    stored = run.summaries
    if not force and _up_to_date(run, stored, opts):
        assert stored is not None
        return SummaryOutcome(run, stored, False, time.perf_counter() - started)
    col = single_pass(run, opts, workers=workers, progress=progress, scheduler=scheduler)
    window = choose_window(run, col.snapshots, opts.window)
    arrays, attrs = build_summaries(run, opts, col, window)
    write_summaries(run, arrays, attrs)
    fresh = run.summaries
    assert fresh is not None
    return SummaryOutcome(run, fresh, True, time.perf_counter() - started, col.seconds)


def summarize_in_memory(
    run: Run,
    options: SummaryOptions | Mapping[str, Any] | None = None,
    *,
    workers: int | None = None,
    progress: Progress | None = None,
) -> SummaryOutcome:
    """Compute the summaries of one run as :func:`summarize_run` does, but hold them in
    memory: nothing is written into the run. The outcome's ``run`` is a view of the run
    whose ``summaries`` are the ones computed (figures draw from it like from a stored
    set); raises like :func:`summarize` for a run that cannot be summarised."""
    started = time.perf_counter()
    opts = options if isinstance(options, SummaryOptions) else SummaryOptions.from_mapping(options)
    _refuse(run)
    col = single_pass(run, opts, workers=workers, progress=progress)
    window = choose_window(run, col.snapshots, opts.window)
    view = hold_summaries(run, *build_summaries(run, opts, col, window))
    held = view.summaries
    assert held is not None
    return SummaryOutcome(view, held, True, time.perf_counter() - started, col.seconds)


def summarize(
    runs: Iterable[Run | str | os.PathLike[str]] | Run | str | os.PathLike[str],
    options: SummaryOptions | Mapping[str, Any] | None = None,
    *,
    force: bool = False,
    workers: int | None = None,
    progress: Progress | None = None,
    scheduler: Any = None,
) -> list[SummaryOutcome]:
    """Compute and store the summaries of runs and collections; one outcome per run.

    Parameters
    ----------
    runs
        A run, a location of a run or a collection, or several of them.
    options
        :class:`SummaryOptions` or a mapping of option names to values.
    force
        Recompute even when the stored summaries are up to date.
    workers
        Threads of the single pass (default: the CPUs available).
    progress
        ``progress(done, total, "chunks")`` over the chunks of all runs.
    scheduler
        A Dask scheduler (:class:`~massarc.archive.distributed.Scheduler` or its name):
        each run's pass runs there as a graph, the runs in parallel (default: the local
        pass, one run after the other). Same results; a damaged chunk then stops the
        command after the runs in flight beside it are stored, not only those before it.

    Raises :class:`~massarc.archive.ArchiveError` (a run being written, not a run, a
    damaged chunk) or :class:`ValueError` (an unknown or invalid option) before anything
    is written, except a damaged chunk, found while reading (the runs before it are
    stored).

    Examples
    --------
    >>> import shutil, tempfile
    >>> from massarc.summaries import summarize
    >>> copy = shutil.copytree("samples/dune-strip.zarr", tempfile.mkdtemp() + "/d.zarr")
    >>> [done] = summarize(copy, {"probes": 8, "resamples": 99})
    >>> done.computed, done.summaries["largest_mass"].shape == (4, 512)
    (True, True)
    >>> summarize(copy, {"probes": 8, "resamples": 99})[0].computed   # idempotent
    False
    """
    opts = options if isinstance(options, SummaryOptions) else SummaryOptions.from_mapping(options)
    items = [runs] if isinstance(runs, Run | str | os.PathLike) else list(runs)
    opened: list[Run] = []
    for item in items:
        if isinstance(item, Run):
            _refuse(item)
            opened.append(item)
        else:
            opened.extend(open_for_summaries(item))

    def one(run: Run, tick: Progress) -> SummaryOutcome:
        return summarize_run(
            run, opts, force=force, workers=workers, progress=tick, scheduler=scheduler
        )

    outcomes = over_runs(opened, one, progress, parallel=scheduler is not None)
    return outcomes
