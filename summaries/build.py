"""From the reduced statistics to the stored arrays and their attributes.

Every array gets its dimension names and units (:data:`massarc.schema.spec.SUMMARY_ARRAYS`)
and the provenance attributes ``massarc_version``, ``options`` and ``window``; arrays
with a method of their own say it in ``method``. The scalar findings (exponents, extreme
value fits, condensate against theory) are stored as attributes of the arrays they are
drawn from and, together, in the group's ``massarc`` attribute, so that a table of a
whole sweep reads no array.

Definitions: ``typical_mass`` = sum m^2 / sum m per (replica, snapshot), the
threshold-free mass-weighted mean site mass; ``coarsening_length`` = (V / N_c)^(1/d), the
mean spacing of condensates on a lattice of V sites and d axes, with N_c the replica mean
of ``condensates`` (L / N_c in 1D; NaN where no replica has a condensate).
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from typing import Any

import numpy as np

from massarc.archive import Run
from massarc.archive.summaries import StoredArray
from massarc.schema.laws import dynamic_exponent, relaxation_time
from massarc.schema.spec import ARCHIVE_VERSION, SUMMARY_ARRAYS
from massarc.schema.sweep import sweep_point
from massarc.schema.version import __version__

from .collect import Collected
from .extremes import extreme_sample, fit_extremes
from .growth import fit_growth, fitting_range
from .options import SummaryOptions
from .replicas import bootstrap_intervals, over_replicas
from .theory import condensate_report

__all__ = ["build_summaries", "first_zero", "model_line"]


def first_zero(g: np.ndarray) -> np.ndarray:
    """First r >= 1 where G(r) <= 0, per row of ``g`` (probe, r); NaN where none.

    >>> first_zero(np.array([[2.0, 0.5, -0.1, -0.4], [1.0, 0.2, 0.1, 0.3]])).tolist()
    [2.0, nan]
    """
    out = np.full(len(g), np.nan)
    for p, row in enumerate(np.asarray(g)):
        hits = np.flatnonzero(row[1:] <= 0)
        if hits.size:
            out[p] = float(hits[0] + 1)
    return out


def model_line(run: Run) -> dict[str, Any]:
    """Family, its main parameter, sites and density: the columns of a sweep table (see
    :func:`massarc.schema.sweep_point`)."""
    point = sweep_point(run.meta)
    return point.model_dump(include={"family", "drift", "parameter", "sites", "density"})


def _occupation(col: Collected, start: int) -> tuple[np.ndarray, int]:
    """Histogram counts of the blocks lying in the window (all replicas), and the first
    snapshot they cover (the window start rounded up to a block edge)."""
    edges = col.histogram.edges
    inside = np.flatnonzero(edges[:-1] >= start)
    if inside.size == 0:
        inside = np.array([len(edges) - 2])
    counts = col.histogram.counts[:, inside].sum(axis=(0, 1))
    return counts.astype(np.int64), int(edges[inside[0]])


def build_summaries(
    run: Run, opts: SummaryOptions, col: Collected, window: dict[str, Any]
) -> tuple[dict[str, StoredArray], dict[str, Any]]:
    """The arrays to store and the group attributes."""
    meta = run.meta
    snap, cond, corr = col.snapshots, col.condensates, col.correlation
    times = np.asarray(run.times)
    common = {"massarc_version": __version__, "options": opts.as_dict(), "window": window}
    arrays: dict[str, StoredArray] = {}

    def put(name: str, data: np.ndarray, long_name: str, dtype: Any = None, **extra: Any) -> None:
        dims, units = SUMMARY_ARRAYS[name]
        units = meta.run.time_units if units == "time" else units
        attrs = {"long_name": long_name, "units": units, **common, **extra}
        stored = None if dtype is None else np.dtype(dtype)
        arrays[name] = StoredArray(dims, np.asarray(data), attrs, stored)

    threshold = {"above": col.above, "rule": col.rule}
    # the stored summaries keep 64-bit integers; the statistic's narrower arrays are cast
    # while they are written (StoredArray.dtype), not copied here
    as64 = np.int64
    put("largest_mass", snap.maximum, "largest site mass", as64)
    first_site = "flat (C-order) index of the first site holding it"
    put("largest_site", snap.argmax, first_site, as64)
    put("second_moment", snap.sum_sq, "sum over sites of m^2")
    put("occupied", snap.occupied, "sites with m > 0", as64)
    put("condensates", cond.count, "sites above the condensate threshold", threshold=threshold)
    put("condensate_mass", cond.mass, "mass on sites above the threshold", threshold=threshold)
    with np.errstate(invalid="ignore", divide="ignore"):
        typical = snap.sum_sq / snap.total
    put("typical_mass", typical, "mass-weighted mean site mass, sum m^2 / sum m")

    z = dynamic_exponent(meta.model)
    expected = None if z is None else 1.0 / z
    t0, t1, range_rule = fitting_range(
        times, relaxation_time(meta), opts.fit_start, opts.fit_stop, opts.fit_saturation,
        opts.fit_decades,
    )  # fmt: skip
    fit_kw = {"points": opts.fit_points, "min_decades": opts.min_decades,
              "resamples": opts.resamples, "seed": opts.seed}  # fmt: skip

    initial = meta.run.initial.kind if meta.run.initial is not None else None
    settled = initial in ("steady-state", "previous-run")

    def growth(values: np.ndarray) -> dict[str, Any]:
        fit = fit_growth(times, values, t0, t1, expected=expected, **fit_kw)
        if settled:  # a slope is still fitted, but there is no coarsening to measure
            fit["note"] = f"the run starts from {initial}: there is no growth to measure"
        return {**fit, "range_rule": range_rule, "steady_start": settled}

    mean, var = over_replicas(snap.maximum)
    exponents = {"largest_mass": growth(snap.maximum.astype(np.float64)),
                 "typical_mass": growth(typical)}  # fmt: skip
    length_fit = growth(cond.count.astype(np.float64))
    d = len(run.sites)
    for key in ("exponent", "stderr"):
        if length_fit[key] is not None:
            length_fit[key] = -length_fit[key] / d if key == "exponent" else length_fit[key] / d
    length_fit["method"] += f"; fitted on the mean count N_c, exponent = -slope / {d}"
    exponents["coarsening_length"] = length_fit
    put("largest_mass_mean", mean, "largest mass, mean over replicas",
        growth=exponents["largest_mass"])  # fmt: skip
    put("largest_mass_var", var, "largest mass, variance over replicas (ddof = 1)")
    put("typical_mass_mean", over_replicas(typical)[0], "typical mass, mean over replicas",
        growth=exponents["typical_mass"])  # fmt: skip
    n_c = cond.count.astype(np.float64).mean(axis=0)
    with np.errstate(divide="ignore"):
        length = np.where(n_c > 0, (math.prod(run.sites) / n_c) ** (1.0 / d), np.nan)
    put("coarsening_length", length, "mean spacing of condensates, (V / N_c)^(1/d)",
        threshold=threshold, growth=length_fit)  # fmt: skip

    probes = col.probes
    put("probe_snapshot", probes, "snapshots where G and the intervals are kept")
    put("probe_time", times[probes], "time of the probes")
    ci_mean, ci_var = bootstrap_intervals(
        snap.maximum[:, probes], resamples=opts.resamples, confidence=opts.confidence,
        seed=opts.seed,
    )  # fmt: skip
    ci = {"method": "percentile bootstrap over replicas", "confidence": opts.confidence}
    put("largest_mass_mean_ci", ci_mean, "interval of the mean largest mass", **ci)
    put("largest_mass_var_ci", ci_var, "interval of the variance of the largest mass", **ci)
    _correlations(put, corr, meta, opts)

    start, stride = window["start"], window["stride"]
    counts, first = _occupation(col, start)
    put("occupation", counts, "single-site occupation counts over the window and replicas",
        first_snapshot=first, overflow_bin=len(counts) - 1,
        note="the last bin counts every mass >= its index")  # fmt: skip
    sample, used = extreme_sample(snap.maximum, snap.valid, start, stride, opts.extreme_max)
    extremes = {"stride": used, **fit_extremes(sample, gof=opts.gof, draws=opts.gof_draws,
                                               seed=opts.seed)}  # fmt: skip
    put("extreme_sample", sample, "largest masses of the window, thinned", fits=extremes)
    sl = (slice(None), slice(start, None))
    condensate = condensate_report(meta, snap.maximum[sl], cond.mass[sl], snap.total[sl])
    group = {
        "format_version": ARCHIVE_VERSION, "massarc_version": __version__,
        "created": datetime.now(UTC).isoformat(timespec="seconds"),
        "extent": {"replicas": run.n_replicas, "snapshots": run.n_snapshots},
        "options": opts.as_dict(), "window": window, "threshold": threshold,
        "model": model_line(run), "exponents": exponents, "extremes": extremes,
        "condensate": condensate,
    }  # fmt: skip
    return arrays, group


def _correlations(put: Any, corr: Any, meta: Any, opts: SummaryOptions) -> None:
    boundary = list(meta.lattice.boundary)
    about = {
        "definition": "G(d) = mean over the pairs (i, i+d) inside the lattice of m_i m_(i+d), "
        "less rho^2 (rho: the snapshot's mean density), averaged over replicas",
        "method": "FFT; zero-padded (direct sums over pairs inside) along walled axes",
        "boundary": boundary,
        "replicas": corr.replicas,
    }
    if len(corr.along) == 1:
        put("correlation", corr.along[0], "two-point function G(r, t)", **about)
        main = corr.along[0]
    else:
        put("correlation", corr.radial, "G radially averaged, bins round(|d|)", **about)
        put("correlation_y", corr.along[0], "G along axis y (dx = 0)", **about)
        put("correlation_x", corr.along[1], "G along axis x (dy = 0)", **about)
        main = corr.radial
    if opts.zero_crossing:
        zero = first_zero(main)
        put("correlation_zero", zero, "first r >= 1 with G(r) <= 0",
            meaningless=[bool(not math.isfinite(v) or v <= 2) for v in zero],
            note="meaningless while it sits at r <= 2 (single-site condensates; sum G = 0 "
            "forces a zero crossing even on uncorrelated data)")  # fmt: skip
