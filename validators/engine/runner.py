"""The runner: every enabled check on every run, from one pass over each run's chunks.

For each run the union of the enabled checks' ``needs`` is built (identical statistic
requests are shared; the same statistic with different options gets one instance per
distinct option set), one :func:`~massarc.archive.scan.scan` feeds them all (its results
are addressed by :class:`StatisticKey`), and each check gets a
:class:`~massarc.validators.engine.registry.CheckContext` holding every declared option:
the defaults, overridden by the settings, merged here once. A check
whose preconditions fail is ``skip`` with the reason; a check (or a statistic it needs)
that raises becomes ``error`` with the exception's one-line message, and the audit goes on.

>>> from massarc.validators import audit                        # doctest: +SKIP
>>> report = audit(["runs/sweep"], skip=["steady-state"])       # doctest: +SKIP
>>> report.status, [c.id for c in report.runs[0].checks]        # doctest: +SKIP
('pass', ['schema', 'integrity', 'time-order', 'nonnegative', 'conservation', ...])
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Iterable, Mapping
from typing import Any, NamedTuple

from massarc.archive import ArchiveError, Run, open_runs
from massarc.archive.distributed import over_runs
from massarc.archive.progress import Progress
from massarc.archive.scan import ScanResult, Statistic, scan
from massarc.archive.store import location_name
from massarc.schema.spec import ARCHIVE_MAJOR, ATTRIBUTE_KEY, parse_version
from massarc.schema.sweep import sweep_point
from massarc.schema.version import __version__

from ..report.model import AuditReport, OptionSetting, RunReport
from .registry import Check, CheckContext, available_checks
from .result import CheckResult, worst
from .settings import ConfigError, parse_options

__all__ = ["audit", "open_for_audit"]


def _one_line(exc: BaseException) -> str:
    lines = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {lines[0]}" if lines else type(exc).__name__


def open_for_audit(location: str | os.PathLike[str] | Any) -> list[Run]:
    """Open a run or a collection leniently (invalid metadata is for the ``schema`` check
    to report) but refuse what is not a massarc run of a known major format version.

    Raises :class:`~massarc.archive.ArchiveError` (including ``NotARunError``).
    """
    try:
        runs = open_runs(location, lenient=True)
    except ArchiveError:
        raise
    except Exception as exc:  # e.g. a zarr.json that is not JSON
        raise ArchiveError(
            f"{location_name(location)}: cannot open as a Zarr v3 group ({_one_line(exc)})"
        ) from None
    for run in runs:
        if run.header is not None:
            continue
        raw = run.group.attrs.get(ATTRIBUTE_KEY)
        version = raw.get("format_version") if isinstance(raw, dict) else None
        try:
            major, minor = parse_version(version)
        except ValueError:
            continue  # an unreadable version is a metadata problem: schema reports it
        if major != ARCHIVE_MAJOR:
            raise ArchiveError(
                f"{run.name}: format_version: expected {ARCHIVE_MAJOR}.x (this massarc); got "
                f"{major}.{minor} (upgrade massarc to read it)"
            )
    return runs


def _select(
    checks: Iterable[str] | None, skip: Iterable[str], registry: Mapping[str, type[Check]]
) -> tuple[list[str], set[str]]:
    """The ids asked for, in order, and those of them to skip."""
    known = ", ".join(registry) or "(none)"
    chosen = list(registry) if checks is None else list(dict.fromkeys(checks))
    skipped = set(skip)
    for cid in (*chosen, *skip):
        if cid not in registry:
            raise ConfigError(f"check id: expected one of {known}; got {cid!r}")
    return chosen, skipped


def _requires(cls: type[Check]) -> tuple[str, ...]:
    if cls.requires is not None:
        return tuple(cls.requires)
    return ("data",) if cls.needs else ()


def _precondition(cls: type[Check], run: Run) -> str | None:
    """Why ``cls`` cannot run on ``run`` (None when it can)."""
    reqs = _requires(cls)
    if "metadata" in reqs and run.meta is None:
        return "no valid metadata (see the schema check)"
    if "data" in reqs and not run.has_data:
        return "the run holds no committed snapshots"
    return None


class StatisticKey(NamedTuple):
    """How the runner asks the single pass for a statistic: its class and its options
    (as sorted JSON). Checks asking for the same class with the same options share one
    instance."""

    statistic: type[Statistic]
    options: str


def _statistic_key(statistic: type[Statistic], options: Mapping[str, Any]) -> StatisticKey:
    return StatisticKey(statistic, json.dumps(dict(options), sort_keys=True, default=repr))


class _RunAudit:
    """The checks of one run: statistics requested, the pass, then each check."""

    def __init__(
        self, run: Run, classes: list[type[Check]], options: Mapping[str, Mapping[str, Any]]
    ):
        self.run = run
        self.classes = classes
        self.options = options  # check id -> every declared option, merged
        self.results: dict[str, CheckResult] = {}
        self.seconds: dict[str, float] = {}
        self.statistics: dict[StatisticKey, Statistic] = {}
        self.unavailable: dict[StatisticKey, str] = {}  # key -> why it cannot be computed
        self.requested: dict[str, dict[str, StatisticKey]] = {}  # check id -> name -> key
        self.cache: dict[str, Any] = {}  # shared by the checks of this run

    def plan(self) -> list[type[Check]]:
        runnable = []
        for cls in self.classes:
            reason = _precondition(cls, self.run)
            if reason is not None:
                self.results[cls.id] = cls().result("skip", f"not run: {reason}")
                continue
            requested: dict[str, StatisticKey] = {}
            if self.run.has_data:
                missing = [name for name in cls.needs if cls.statistic(name) is None]
                if missing:  # registration checks needs; a registry swapped since may not
                    text = f"cannot run: statistic {missing[0]!r} is not registered"
                    self.results[cls.id] = cls().result("error", text)
                    continue
                for name, opts in cls.needs.items():
                    requested[name] = self._request(cls, name, opts)
            self.requested[cls.id] = requested
            runnable.append(cls)
        return runnable

    def _request(self, cls: type[Check], name: str, opts: Mapping[str, Any]) -> StatisticKey:
        """The key of statistic ``name`` with ``opts`` for ``cls``; one instance per key."""
        statistic = cls.statistic(name)
        assert statistic is not None
        key = _statistic_key(statistic, opts)
        if key not in self.statistics and key not in self.unavailable:
            try:
                self.statistics[key] = statistic(self.run, **dict(opts))
            except Exception as exc:
                self.unavailable[key] = f"statistic {name!r}: {_one_line(exc)}"
        return key

    def check(self, cls: type[Check], res: ScanResult[StatisticKey] | None) -> CheckResult:
        stats: dict[str, Any] = {}
        for name, key in self.requested.get(cls.id, {}).items():
            if key in self.unavailable:
                return cls().result("error", f"cannot run: {self.unavailable[key]}")
            if res is not None and key in res.errors:
                return cls().result("error", f"statistic {name!r} failed: {res.errors[key]}")
            stats[name] = res.results[key] if res is not None else None
        ctx = CheckContext(
            run=self.run,
            meta=self.run.meta,
            stats=stats,
            options=self.options[cls.id],
            cache=self.cache,
            faults=list(res.faults) if res is not None else [],
        )
        try:
            out = cls().run(ctx)
        except Exception as exc:  # a check's bug or a damaged input it did not expect
            return cls().result("error", _one_line(exc))
        if not isinstance(out, CheckResult):
            return cls().result("error", f"expected a CheckResult; got {type(out).__name__}")
        if out.id != cls.id:
            out = out.model_copy(update={"id": cls.id})
        return out

    def execute(
        self, strict: bool, workers: int | None, progress: Progress | None, scheduler: Any = None
    ) -> tuple[list[CheckResult], ScanResult[StatisticKey] | None]:
        runnable = self.plan()
        res = None
        if self.statistics:
            try:
                res = scan(
                    self.run,
                    self.statistics,
                    progress=progress,
                    workers=workers,
                    scheduler=scheduler,
                )
            except Exception as exc:  # the machine, not the data: a missing library, a lost disk
                why = f"the pass over the chunks stopped: {_one_line(exc)}"
                self.unavailable.update({key: why for key in self.statistics})
        for cls in runnable:
            started = time.perf_counter()
            out = self.check(cls, res)
            self.seconds[cls.id] = time.perf_counter() - started
            if strict and out.status == "warn":
                out = out.model_copy(
                    update={"status": "fail", "message": f"{out.message} [strict: warning fails]"}
                )
            self.results[cls.id] = out
        return [self.results[cls.id] for cls in self.classes], res


def audit(
    runs: Iterable[Run | str | os.PathLike[str]],
    *,
    checks: Iterable[str] | None = None,
    skip: Iterable[str] = (),
    options: Mapping[str, Mapping[str, Any]] | None = None,
    strict: bool = False,
    progress: Progress | None = None,
    workers: int | None = None,
    config: str | None = None,
    scheduler: Any = None,
    origins: Mapping[str, Mapping[str, str]] | None = None,
    ignored: Iterable[str] = (),
) -> AuditReport:
    """Audit runs (``Run`` objects or locations of runs and collections).

    Parameters
    ----------
    checks
        Ids of the checks to run (default: every registered check, in registration order).
    skip
        Ids not to run; they are listed in the report as ``skip``.
    options
        ``{check id: {option: value}}`` over the checks' defaults.
    strict
        Warnings count as failures.
    progress
        ``progress(done, total, "chunks")`` over the chunks of all runs.
    workers
        Threads of the single pass (default: the CPUs available).
    config
        The configuration file the settings came from (recorded in the report).
    scheduler
        A Dask scheduler (:class:`~massarc.archive.distributed.Scheduler` or its name):
        each run's pass runs there as a graph, the runs in parallel (default: the local
        pass, one run after the other). Same results.
    origins
        ``{check id: {option: where its value came from}}`` (a file, ``--set``), recorded
        in the report for every option in ``options``; ``options`` where not given.
    ignored
        Configuration files found inside the audited runs and not read (recorded).

    Raises :class:`~massarc.archive.ArchiveError` for a location that is not a readable
    run, and :class:`~massarc.validators.engine.settings.ConfigError` for unknown ids or
    options.
    """
    started = time.perf_counter()
    registry = available_checks()
    chosen, skipped = _select(checks, skip, registry)
    classes = [registry[c] for c in chosen if c not in skipped]
    settings = parse_options(dict(options or {}), registry, "options")
    merged = {cls.id: cls.option_values(settings.get(cls.id)) for cls in classes}
    set_options = [
        OptionSetting(
            check=cid,
            option=name,
            value=value,
            default=registry[cid].options[name].default,
            source=(origins or {}).get(cid, {}).get(name, "options"),
        )
        for cid, opts in settings.items()
        for name, value in opts.items()
    ]
    opened: list[Run] = []
    for item in runs:
        opened.extend([item] if isinstance(item, Run) else open_for_audit(item))

    def one(run: Run, tick: Progress) -> RunReport:
        run_started = time.perf_counter()
        worker = _RunAudit(run, classes, merged)
        ran, res = worker.execute(strict, workers, tick, scheduler)
        by_id = {r.id: r for r in ran}
        results = [
            by_id[cid]
            if cid in by_id
            else registry[cid]().result("skip", "not run: skipped by configuration")
            for cid in chosen
        ]
        return RunReport(
            path=run.name,
            status=worst([r.status for r in results]),
            checks=results,
            seconds=time.perf_counter() - run_started,
            check_seconds=worker.seconds,
            chunks=len(run.chunk_refs()),
            chunks_read=res.chunks_read if res else 0,
            bytes_decoded=res.bytes_decoded if res else 0,
            point=sweep_point(run.meta) if run.meta is not None else None,
        )

    reports = over_runs(opened, one, progress, parallel=scheduler is not None)
    return AuditReport(
        runs=reports,
        status=worst([r.status for r in reports]),
        massarc_version=__version__,
        strict=strict,
        seconds=time.perf_counter() - started,
        config=config,
        options=set_options,
        ignored=list(ignored),
    )
