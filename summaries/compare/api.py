"""``compare_runs``: are two runs that claim the same model and parameters compatible?

First the metadata: the claims (model, its parameters, lattice, boundaries, density) must
be equal, else :class:`CompareRefused` (unless ``force``); the extents (replicas,
snapshots, times, windows) are listed. Then, inside each run's stationary window, three
two-sample tests with autocorrelation-corrected sizes (:mod:`.agreement`): the occupation
law P(m), the largest-mass distribution and G(r). Their p-values are corrected for
multiplicity by Holm's method; the runs disagree when an adjusted p-value is below
``level``.

Default level 0.01: with the effective sizes estimated from the runs themselves the tests
are not exactly at their nominal size; docs/calibration-compare.md measures the rate of
false disagreement on honest pairs and the power against a 5 % parameter change.
"""

from __future__ import annotations

import math
import os
from typing import Any

import numpy as np

from massarc.archive import Run, open_run
from massarc.schema.version import __version__

from .agreement import TestOutcome, correlation_test, holm, largest_mass_test, occupation_test
from .observed import Observed, observe
from .result import OBSERVABLE_NAMES, Comparison, Difference, ObservableComparison

__all__ = ["DEFAULT_LEVEL", "CompareRefused", "compare_runs", "metadata_differences"]

#: Default family-wise level of ``compare`` (docs/calibration-compare.md).
DEFAULT_LEVEL = 0.01

_TESTS = {
    "occupation": (
        "G test of homogeneity on effective counts",
        "both runs' single-site masses follow one law P(m)",
    ),
    "largest-mass": (
        "two-sample Kolmogorov-Smirnov with effective sizes",
        "the largest mass of a snapshot follows one law in both runs",
    ),
    "correlation": (
        "Hotelling T^2 (Wald) on G(r) at the probes",
        "the time-averaged G(r) of both runs are equal at small r",
    ),
}


class CompareRefused(ValueError):
    """The runs claim different models or parameters (and ``force`` was not given)."""


def _density(run: Run) -> float | None:
    info = run.meta.run
    if info.density is not None:
        return float(info.density)
    if info.total_mass is not None:
        return info.total_mass / run.meta.lattice.volume
    return None


def metadata_differences(a: Run, b: Run) -> list[Difference]:
    """Every claim (``model.*``, ``lattice.*``, ``density``) and extent of the two runs."""
    rows: list[Difference] = []

    def add(key: str, x: Any, y: Any, kind: str) -> None:
        same = x == y
        if isinstance(x, float) and isinstance(y, float):
            same = math.isclose(x, y, rel_tol=1e-9)
        rows.append(Difference(key=key, a=x, b=y, kind=kind, same=same))  # type: ignore[arg-type]

    for part in ("model", "lattice"):
        da = getattr(a.meta, part).model_dump(mode="json")
        db = getattr(b.meta, part).model_dump(mode="json")
        keys = [*da, *(k for k in db if k not in da)]
        for key in sorted(keys, key=lambda k: k != "family"):
            add(f"{part}.{key}", da.get(key), db.get(key), "claim")
    add("density", _density(a), _density(b), "claim")
    add("run.regime", a.meta.run.regime, b.meta.run.regime, "extent")
    add("replicas", a.n_replicas, b.n_replicas, "extent")
    add("snapshots", a.n_snapshots, b.n_snapshots, "extent")
    ta, tb = np.asarray(a.times), np.asarray(b.times)
    add("time.first", float(ta[0]), float(tb[0]), "extent")
    add("time.last", float(ta[-1]), float(tb[-1]), "extent")
    return rows


def _refusal(a: Run, b: Run, rows: list[Difference]) -> str | None:
    claims = [r for r in rows if r.kind == "claim" and not r.same]
    if not claims:
        return None
    what = "different models" if any(r.key == "model.family" for r in claims) else (
        "the same model with different parameters or lattices"
    )  # fmt: skip
    listed = "; ".join(f"{r.key}: {r.a!r} vs {r.b!r}" for r in claims[:4])
    more = f" (and {len(claims) - 4} more)" if len(claims) > 4 else ""
    return f"{a.name} and {b.name} claim {what} ({listed}{more}); --force compares them anyway"


def _why_not_stationary(run: Run, obs: Observed) -> str | None:
    if run.meta.run.regime == "transient":
        return f"{run.name} declares a transient regime"
    if obs.stationary:
        return None
    reason = str(obs.window.get("reason", "")).removesuffix(": the last half")
    if reason.startswith("no stationary window"):
        return f"{run.name} has {reason}"
    return f"{run.name}: its summaries use {reason}, not a stationary window"


def _run_test(name: str, a: Observed, b: Observed) -> TestOutcome:
    if name == "occupation":
        if not (math.isfinite(a.efficiency) and math.isfinite(b.efficiency)):
            raise ValueError("every window observable is constant: no effective size")
        return occupation_test(a.occupation, b.occupation, (a.efficiency, b.efficiency))
    if name == "largest-mass":
        for o in (a, b):
            if not math.isfinite(o.largest_draws):
                raise ValueError(f"the largest mass of {o.name} is constant in its window")
        return largest_mass_test(a.largest, b.largest, (a.largest_draws, b.largest_draws))
    if a.correlation.shape[1:] != b.correlation.shape[1:]:
        raise ValueError(
            f"G(r) has {a.correlation.shape[1]} distances in {a.name} and "
            f"{b.correlation.shape[1]} in {b.name}"
        )
    return correlation_test(a.correlation, b.correlation, (a.probe_draws, b.probe_draws))


def compare_runs(
    a: Run | str | os.PathLike[str],
    b: Run | str | os.PathLike[str],
    *,
    level: float = DEFAULT_LEVEL,
    force: bool = False,
) -> Comparison:
    """Compare two runs that claim the same model and parameters.

    Parameters
    ----------
    a, b
        Runs or their locations. They are only read: summaries that are not stored (or
        are out of date) are computed in memory and not written.
    level
        Family-wise level: the runs disagree when an observable's Holm-adjusted p-value
        is below it.
    force
        Compare even when the claims differ (the differences are still listed).

    Raises
    ------
    CompareRefused
        The runs claim different models, parameters, lattices or densities.
    ValueError
        ``level`` is not in (0, 1).
    massarc.archive.ArchiveError
        A run cannot be read, is being written, or has a damaged chunk.

    Examples
    --------
    >>> from massarc.summaries.compare import compare_runs
    >>> same = compare_runs("samples/depot-ring.zarr", "samples/depot-ring.zarr")
    >>> same.status, [o.status for o in same.observables]
    ('pass', ['pass', 'pass', 'pass'])
    """
    if not (0.0 < level < 1.0):
        raise ValueError(f"level: expected a number in (0, 1); got {level!r}")
    run_a = a if isinstance(a, Run) else open_run(a)
    run_b = b if isinstance(b, Run) else open_run(b)
    rows = metadata_differences(run_a, run_b)
    refusal = _refusal(run_a, run_b, rows)
    if refusal is not None and not force:
        raise CompareRefused(refusal)
    obs_a, obs_b = observe(run_a), observe(run_b)
    for key in ("rule", "start", "snapshots", "stride"):
        x, y = obs_a.window.get(key), obs_b.window.get(key)
        rows.append(Difference(key=f"window.{key}", a=x, b=y, kind="extent", same=x == y))
    why = _why_not_stationary(run_a, obs_a) or _why_not_stationary(run_b, obs_b)
    outcomes: dict[str, TestOutcome | str] = {}
    for name in OBSERVABLE_NAMES:
        if why is not None:
            outcomes[name] = why
            continue
        try:
            outcomes[name] = _run_test(name, obs_a, obs_b)
        except ValueError as exc:
            outcomes[name] = str(exc)
    tested = [n for n in OBSERVABLE_NAMES if isinstance(outcomes[n], TestOutcome)]
    adjusted = dict(zip(tested, holm([outcomes[n].p_value for n in tested]), strict=True))  # type: ignore[union-attr]
    results = []
    for name in OBSERVABLE_NAMES:
        test, null = _TESTS[name]
        out = outcomes[name]
        if isinstance(out, str):
            results.append(ObservableComparison(
                observable=name, status="skip", test=test, null=null, reason=out,
            ))  # fmt: skip
            continue
        adj = adjusted[name]
        results.append(ObservableComparison(
            observable=name, status="fail" if adj < level else "pass", test=test, null=null,
            statistic=_finite(out.statistic), dof=out.dof, p_value=out.p_value,
            adjusted_p=adj, sizes=out.sizes, detail=out.detail,
        ))  # fmt: skip
    statuses = {r.status for r in results}
    status = "fail" if "fail" in statuses else ("pass" if "pass" in statuses else "skip")
    return Comparison(
        a=run_a.name, b=run_b.name, status=status, level=level,  # type: ignore[arg-type]
        forced=refusal is not None, metadata=tuple(rows), observables=tuple(results),
        sources=(obs_a.source, obs_b.source), windows=(obs_a.window, obs_b.window),
        massarc_version=__version__,
    )  # fmt: skip


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None
