"""Growth exponents: y(t) ~ t^alpha by least squares on log-log, with a bootstrap error.

Method. The replica mean of y is taken at up to ``points`` snapshots spaced geometrically
in time inside the fitting range [t_start, t_stop] (nearest snapshots, each used once),
so that every decade weighs the same whatever the run's sampling; alpha is the ordinary
least-squares slope of log(mean y) against log t. Its standard error is the standard
deviation of the slope over bootstrap resamples of the replicas
(:func:`scipy.stats.bootstrap`, replicas independent; the snapshots of one replica are
correlated, so the least-squares formula would understate it). With one replica the
least-squares standard error is given instead, and said.

A fit is flagged ``too_short`` when its range spans fewer than ``min_decades`` decades
or holds fewer than 5 snapshots: then alpha means little, whatever its error bar.

>>> import numpy as np
>>> t = np.geomspace(1.0, 1e3, 40)
>>> y = np.vstack([2.0 * t**0.5, 3.0 * t**0.5])           # two replicas
>>> fit = fit_growth(t, y, 1.0, 1e3, expected=0.5)
>>> round(fit["exponent"], 6), fit["too_short"]
(0.5, False)
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np

__all__ = ["fit_growth", "fitting_range", "geometric_points"]


def geometric_points(times: np.ndarray, start: float, stop: float, points: int) -> np.ndarray:
    """Indices of up to ``points`` snapshots nearest to geometrically spaced times in
    [start, stop] (each snapshot once; times must be increasing).

    >>> geometric_points(np.arange(0.0, 101.0), 1.0, 100.0, 3).tolist()
    [1, 10, 100]
    """
    inside = np.flatnonzero((times >= start) & (times <= stop) & (times > 0))
    if inside.size <= 1:
        return inside
    logs = np.log(times[inside])
    targets = np.linspace(logs[0], logs[-1], points)
    pos = np.clip(np.searchsorted(logs, targets), 1, len(logs) - 1)
    nearer_left = targets - logs[pos - 1] <= logs[pos] - targets
    return inside[np.unique(np.where(nearer_left, pos - 1, pos))]


def fitting_range(
    times: np.ndarray,
    relaxation: float | None,
    start: float | None,
    stop: float | None,
    saturation: float,
    decades: float,
) -> tuple[float, float, str]:
    """The fitting range and the rule that gave it, in words.

    Default stop: ``saturation`` x the model's relaxation time (finite-size saturation
    sets in near it), or the last time; default start: ``decades`` below the stop, but not
    before the first positive time.
    """
    positive = times[times > 0]
    if positive.size == 0:
        return math.nan, math.nan, "no snapshot at a positive time"
    last, first = float(positive[-1]), float(positive[0])
    rule = []
    if stop is None:
        if relaxation is not None:
            stop = min(last, saturation * relaxation)
            rule.append(f"stop = min(last time, {saturation:g} x relaxation time {relaxation:.4g})")
        else:
            stop = last
            rule.append("stop = the last time")
    else:
        rule.append("stop given")
    if start is None:
        start = max(first, stop / 10.0**decades)
        rule.append(f"start = max(first positive time, stop / 10^{decades:g})")
    else:
        rule.append("start given")
    return float(start), float(stop), "; ".join(rule)


def _slope(x: np.ndarray, y: np.ndarray, axis: int = -1) -> np.ndarray:
    xm = x - x.mean()
    return np.sum(xm * (y - y.mean(axis=axis, keepdims=True)), axis=axis) / np.sum(xm * xm)


def fit_growth(
    times: np.ndarray,
    values: np.ndarray,
    start: float,
    stop: float,
    *,
    expected: float | None = None,
    points: int = 64,
    min_decades: float = 1.0,
    resamples: int = 999,
    seed: int = 0,
) -> dict[str, Any]:
    """Fit mean_r values[r, t] ~ t^alpha over [start, stop] (``values``: (replica, time)).

    Returns a plain dict: ``exponent``, ``stderr``, ``error_method``, ``expected``,
    ``start``, ``stop``, ``points``, ``decades``, ``too_short``, ``note``.
    """
    out: dict[str, Any] = {
        "exponent": None, "stderr": None, "error_method": None, "expected": expected,
        "start": start, "stop": stop, "points": 0, "decades": 0.0, "too_short": True,
        "method": "least squares on log-log of the replica mean at geometrically spaced "
        "snapshots",
    }  # fmt: skip
    if not (math.isfinite(start) and math.isfinite(stop) and 0 < start < stop):
        out["note"] = "no fitting range (no positive times, or start >= stop)"
        return out
    keep = np.all(np.isfinite(values) & (values > 0), axis=0)
    idx = geometric_points(times, start, stop, points)
    idx = idx[keep[idx]]
    out["points"] = int(idx.size)
    if idx.size < 3:
        out["note"] = "fewer than 3 usable snapshots in the range"
        return out
    x = np.log(times[idx])
    y = np.asarray(values[:, idx], dtype=np.float64)
    out["decades"] = float((x[-1] - x[0]) / math.log(10.0))
    out["exponent"] = float(_slope(x, np.log(y.mean(axis=0))))
    n_rep = y.shape[0]
    if n_rep >= 2:
        from scipy.stats import bootstrap

        def slope_of_mean(picked: np.ndarray, axis: int = -1) -> np.ndarray:
            # picked: resampled replica indices (..., replicas)
            mean = y[np.moveaxis(picked, axis, -1).astype(np.int64)].mean(axis=-2)
            return _slope(x, np.log(mean))

        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            res = bootstrap(
                (np.arange(n_rep),), slope_of_mean, vectorized=True, n_resamples=resamples,
                method="percentile", rng=np.random.default_rng(seed),
            )  # fmt: skip
        out["stderr"] = float(res.standard_error)
        out["error_method"] = f"bootstrap over {n_rep} replicas ({resamples} resamples)"
    else:
        resid = np.log(y[0]) - (out["exponent"] * (x - x.mean()) + np.log(y[0]).mean())
        dof = max(idx.size - 2, 1)
        out["stderr"] = float(math.sqrt(resid @ resid / dof / np.sum((x - x.mean()) ** 2)))
        out["error_method"] = "least squares (one replica; understated: snapshots correlate)"
    short = []
    if out["decades"] < min_decades:
        short.append(f"the range spans {out['decades']:.2f} decades (< {min_decades:g})")
    if idx.size < 5:
        short.append(f"only {idx.size} snapshots")
    out["too_short"] = bool(short)
    out["note"] = "; ".join(short) if short else "ok"
    return out
