"""The judgement behind the ``drift`` check: one lattice axis at a time, pure functions.

Inputs are the ``spacetime`` statistic (antisymmetric space-time covariances A(r) of the
masses at sampled starts, their windowed sums ``zero`` and first moments ``first``, and the
equal-time susceptibilities K+ and K-; :mod:`.spacetime`) and, at walls, the ``profiles``
statistic. How far a fluctuation can travel comes from :mod:`massarc.validators.analysis.transport`.

Mirror test (is the axis mirror-symmetric?)
    H0: the process is mirror-symmetric along the axis in distribution, so every cell
    (variant, lag, window, moment) has mean 0, and at walls so has the centre of mass of
    the profile. Each cell is judged by
    :func:`massarc.validators.analysis.replica_tests.replica_mean_test` over the
    starts of every replica (only cells whose effective sample size makes the far tail
    trustworthy count: a lag's starts span at most span / lag independent pairs per
    replica, which caps the effective sample size, and so does a window of R sites: its
    profile renews no faster than in R^2 d / r_max, see :func:`renewals`); p_mirror =
    min(1, cells x the smallest two-sided p) (Bonferroni).

Which lags can say where fluctuations went
    Over the time dt of a lag a fluctuation reaches at most s = c dt + 3 sqrt(r_max dt /
    d) + 1 sites (c the kinematic wave speed of the declared drift, r_max the largest hop
    rate, d the dimension; :mod:`massarc.validators.analysis.transport`). A lag is *usable* when s
    fits in the window L//4: fluctuations have then not wrapped the ring nor met the
    far-field compensation that mass conservation imposes on a ring (the first moment
    over the whole ring vanishes), so the sign of every cell of windows up to L//4 is the
    direction of the drift, and its first moment has a prediction.

Size prediction
    For the mass variant (an occupation fluctuation is not conserved, only its projection
    on the density travels) and the smallest windows R >= s and R >= 1.5 s up to L//4,
    E first[R] = (p K+[R] - q K-[R]) dt / d at first (exact as dt -> 0 by mass
    conservation; :mod:`.spacetime`), and it stays close to that
    while the fluctuation remains inside the window (measured on ZRP and CMAM rings of 200
    sites, fluid and condensed, snapshots 1 to 10 hop times apart: ratios 0.85 to 1.15).
    For the ZRP on a ring the product measure makes B(j) flat off the origin, so K[R] is
    the same for every window and the least noisy, K[1], stands for all. The size is
    judged against a band [tol, 1/tol] times the prediction: one-sided mean tests of
    first - tol * prediction (too weak) and first - prediction / tol (too strong), each
    start's own prediction subtracted so that its noise counts, Bonferroni over the
    usable (lag, window) cells and both sides.

Power
    On a mirror-symmetric axis the too-weak test would reach tol |prediction| /
    se(first - tol prediction); a claim that the data "would have shown" the declared
    drift needs that score to exceed the test's threshold by ``margin`` (2: a power of
    about 0.98, as in the boundary check). A declared symmetric axis passes only when a
    totally asymmetric drift of the declared model would reach (|prediction| - 2 se of
    the prediction) / se(first) above the mirror test's threshold plus ``margin``.

Between walls (ZRP declared stationary)
    The declared drift's steady state piles mass towards one wall; its centre of mass
    (:func:`.transport.walls_centre`, exact for the ZRP's product measure) joins the size
    comparisons, against the profile's measured centre of mass.

Decisions per axis
    declared symmetric: fail when p_mirror < alpha; pass when a totally asymmetric drift
    would have been detected; skip otherwise (with the measured numbers).
    declared driven: fail when the usable cells show the other direction (one-sided,
    Bonferroni); fail when the size is significantly outside the band (a symmetric axis
    shows as "too weak" with a near-zero ratio, and needs the power condition); pass when
    the direction is significant and the size within the band (or not predicted); skip
    when nothing usable is decisive.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ...analysis.replica_tests import MeanTest, replica_mean_test
from ...analysis.transport import Transport, dt_for, influence, profile_centre
from .spacetime import VARIANTS, AxisSpacetime

__all__ = ["AxisDrift", "judge_axis"]

_MOMENTS = ("zero", "first")
#: Variants whose first moment has a size prediction: the mass only. An occupation
#: fluctuation is not conserved; only its projection on the density travels, so its
#: first moment falls behind the initial slope (measured: half of it after 10 hop times
#: on a fluid ZRP ring).
_PREDICTED = (0,)


@dataclass(frozen=True)
class _Cell:
    """One mirror-antisymmetric quantity and its test; ``variant`` -1 is the profile's
    centre of mass, ``lag`` -1 an equal-time cell."""

    label: str
    test: MeanTest
    variant: int = -1
    lag: int = -1
    window: int = -1


@dataclass(frozen=True)
class _Size:
    """Predicted against measured first moment for one usable (variant, lag).

    ``detect`` is the score the too-weak test would reach on a mirror-symmetric axis,
    tol |predicted| / se(first - tol prediction); ``shows`` the score a drift of the
    predicted size would reach in the mirror test, (|predicted| - 2 se) / se(first),
    counting the prediction's own uncertainty against it."""

    variant: int
    lag: int
    window: int
    measured: float
    se: float
    predicted: float
    predicted_se: float
    detect: float
    shows: float
    p_weak: float
    p_strong: float


@dataclass(frozen=True)
class AxisDrift:
    """The verdict on one axis: ``status`` (pass, fail, skip), ``reason`` (one phrase),
    ``kind`` of failure (``other-way``, ``symmetric``, ``weaker``, ``stronger``,
    ``driven``) and the measured numbers in :meth:`values`."""

    axis: int
    periodic: bool
    status: str
    reason: str
    kind: str | None
    sign: int  # +1 / -1: the direction the data show (0: none)
    p_value: float | None
    numbers: dict[str, Any] = field(default_factory=dict)

    def values(self) -> dict[str, Any]:
        return {
            "axis": self.axis,
            "boundary": "periodic" if self.periodic else "walls",
            "status": self.status,
            "p_value": self.p_value,
            **self.numbers,
        }


def _label(variant: int, lag: int, window: int, moment: str) -> str:
    return f"{moment} moment, {VARIANTS[variant]}, lag {lag}, window {window}"


def _independent_pairs(data: AxisSpacetime, starts: np.ndarray, lag: int) -> float:
    """Independent pairs a lag can hold per replica: the snapshots its starts span, over
    the lag (overlapping pairs share their fluctuations)."""
    seen = np.isfinite(data.dt).any(axis=(0, 2))
    if not seen.any():
        return 0.0
    used = starts[: len(seen)][seen]
    return float(used[-1] - used[0] + lag) / lag


def renewals(span: float | None, window: int, transport: Transport | None, ndim: int) -> float:
    """Independent values a window of ``window`` sites can hold per replica over ``span``
    time units, at most: its profile renews no faster than a fluctuation crosses it, which
    takes at least window^2 d / r_max (diffusion at the largest hop rate r_max, a share 1/d
    of the moves along the axis). Infinite when the span or the rates are unknown.

    Measured need: on condensed symmetric ZRP rings (L = 200, b = 4, rho = 1.5, snapshots
    10 hop times apart, 300 snapshots) the equal-time occupancy asymmetries over windows of
    8 to 99 sites relax over hundreds of hop times, which Sokal's window on 300 values does
    not see (statistical inefficiency 8 where the scatter of replica means over 100
    replicas implies about 50); without this cap one run in 30 failed as driven.

    >>> renewals(3000.0, 32, Transport(c1=1.0, r_max=5.0), 1)  # 3000 / (32^2 / 5)
    14.6484375
    """
    if span is None or transport is None or not span > 0 or not transport.r_max > 0:
        return math.inf
    return max(1.0, span * transport.r_max / (window**2 * ndim))


def _cells(
    data: AxisSpacetime,
    lags: tuple[int, ...],
    starts: np.ndarray,
    span: float | None = None,
    transport: Transport | None = None,
    ndim: int = 1,
) -> list[_Cell]:
    """Every reliable cell: the changes over each lag, and the equal-time asymmetries."""
    out = []
    pairs = {li: _independent_pairs(data, starts, lag) for li, lag in enumerate(lags)}

    def add(y: np.ndarray, label: str, v: int, li: int, w: int) -> None:
        if np.isfinite(y).any():
            cap = min(pairs.get(li, math.inf), renewals(span, w, transport, ndim))
            t = replica_mean_test(y, independent=None if math.isinf(cap) else cap)
            if t.reliable and math.isfinite(t.z) and t.se > 0:
                out.append(_Cell(label, t, v, li, w))

    for moment in _MOMENTS:
        change = data.change(moment)
        base = data.zero0 if moment == "zero" else data.first0
        for v in range(len(VARIANTS)):
            for k, w in enumerate(data.windows):
                for li, lag in enumerate(lags):
                    add(change[:, :, v, li, k], _label(v, lag, int(w), moment), v, li, int(w))
                if v:
                    add(base[:, :, v, k], _label(v, 0, int(w), moment), v, -1, int(w))
    return out


def _usable(
    data: AxisSpacetime, lags: tuple[int, ...], drift: float, transport: Transport, ndim: int
) -> dict[int, tuple[float, float, tuple[int, ...]]]:
    """Usable lags: index -> (largest dt, reach s, windows for the size comparison: the
    smallest >= s, whose susceptibility is least noisy, and the smallest >= 1.5 s, which
    leaves room for the tail of the fluctuation)."""
    quarter = max(1, data.length // 4)
    out = {}
    for li in range(len(lags)):
        dts = data.dt[:, :, li]
        if not np.isfinite(dts).any():
            continue
        dt = float(np.nanmax(dts))
        s = influence(dt, drift, transport, ndim)
        fits = data.windows[(data.windows >= s) & (data.windows <= quarter)]
        roomy = fits[fits >= 1.5 * s]  # a margin for the tail of the fluctuation
        if len(fits):
            out[li] = (
                dt,
                s,
                tuple(sorted({int(fits[0]), int(roomy[0] if len(roomy) else fits[0])})),
            )
    return out


def _sizes(
    data: AxisSpacetime,
    usable: dict[int, tuple[float, float, tuple[int, ...]]],
    p: float,
    ndim: int,
    tolerance: float,
    flat: bool,
    starts: np.ndarray,
    lags: tuple[int, ...],
) -> list[_Size]:
    """The size comparisons of the usable lags. ``flat``: the susceptibility does not
    depend on the window (a product measure on a ring: B(j) is flat off the origin, so
    every window gives K[1]), and the least noisy window stands for all."""
    out = []
    if not np.isfinite(data.suscept_plus).any():
        return out
    q = 1.0 - p
    first = data.change("first")
    pairs = [(li, w) for li, (_, _, ws) in usable.items() for w in ws]
    for li, window in pairs:
        k = int(np.flatnonzero(data.windows == window)[0])
        kk = 0 if flat else k
        for v in _PREDICTED:
            y = first[:, :, v, li, k]
            rate = p * data.suscept_plus[:, :, kk] - q * data.suscept_minus[:, :, kk]
            pred = rate * data.dt[:, :, li] / ndim
            ok = np.isfinite(y) & np.isfinite(pred)
            if ok.sum() < 4:
                continue
            y, pred = np.where(ok, y, np.nan), np.where(ok, pred, np.nan)
            pairs_per_replica = _independent_pairs(data, starts, lags[li])
            meas = replica_mean_test(y, independent=pairs_per_replica)
            if not meas.reliable or not meas.se > 0:
                continue
            expect = replica_mean_test(pred, independent=pairs_per_replica)
            predicted = expect.mean
            sign = 1.0 if predicted >= 0 else -1.0
            weak = replica_mean_test(y - tolerance * pred, independent=pairs_per_replica)
            strong = replica_mean_test(y - pred / tolerance, independent=pairs_per_replica)
            detect = tolerance * abs(predicted) / weak.se if weak.se > 0 else math.inf
            out.append(
                _Size(
                    v,
                    li,
                    window,
                    meas.mean,
                    meas.se,
                    predicted,
                    expect.se,
                    detect,
                    (abs(predicted) - 2.0 * expect.se) / meas.se,
                    weak.p_one_sided(-sign),
                    strong.p_one_sided(sign),
                )
            )
    return out


def _centre_size(
    centre: np.ndarray, predicted: float, variance: float, tolerance: float
) -> _Size | None:
    """The centre of mass of the profile against its steady-state prediction.

    Under the declared steady state one snapshot's centre has variance ``variance``, so the
    mean over R replicas has at most variance / R whatever the autocorrelation within a
    replica (perfectly correlated snapshots are the worst case): that bound is the standard
    error when the data's own estimate is unreliable or smaller."""
    rows = [r[np.isfinite(r)] for r in np.atleast_2d(centre)]
    rows = [r for r in rows if len(r)]
    if not rows:
        return None
    meas = replica_mean_test(centre)
    bound = math.sqrt(max(variance, 0.0) / len(rows))
    se = max(meas.se if meas.reliable and math.isfinite(meas.se) else 0.0, bound, 1e-300)
    mean = float(np.mean([r.mean() for r in rows]))
    sign = 1.0 if predicted >= 0 else -1.0
    z_weak = (mean - tolerance * predicted) / se
    from ...analysis.tails import normal_sf  # scipy.special, on first use

    return _Size(
        -1, -1, -1, mean, se, predicted, 0.0, tolerance * abs(predicted) / se,
        abs(predicted) / se, float(normal_sf(-sign * z_weak)), 1.0,
    )  # fmt: skip


def judge_axis(
    data: AxisSpacetime,
    *,
    lags: tuple[int, ...],
    ndim: int,
    right_probability: float,
    transport: Transport | None,
    starts: np.ndarray | None = None,
    profile: np.ndarray | None = None,
    edges: np.ndarray | None = None,
    flat: bool = False,
    centre: tuple[float, float] | None = None,
    span: float | None = None,
    alpha: float = 1e-4,
    margin: float = 2.0,
    tolerance: float = 0.5,
) -> AxisDrift:
    """Judge one axis against the declared right-hop probability ``right_probability``.

    ``flat``: the equal-time susceptibility is the same for every window (the ZRP's
    product measure on a ring); the smallest window then gives it with the least noise.
    ``centre``: the declared model's steady-state centre of mass between walls (sites from
    the middle) and the variance of one snapshot's centre, compared with the profile's
    when given. ``span``: the time the starts cover; with ``transport`` it caps the
    independent values of each window (:func:`renewals`).
    """
    if starts is None:
        starts = np.arange(data.dt.shape[1])
    cells = _cells(data, lags, starts, span, transport, ndim)
    if profile is not None and edges is not None and not data.periodic:
        t = replica_mean_test(profile_centre(profile, edges))
        if t.reliable and math.isfinite(t.z):
            cells.append(_Cell("centre of mass of the profile", t))
    numbers: dict[str, Any] = {"cells": len(cells)}
    if not cells:
        return AxisDrift(
            data.axis, data.periodic, "skip",
            "too few starts or too little motion for any reliable comparison",
            None, 0, None, numbers,
        )  # fmt: skip
    best = min(cells, key=lambda c: c.test.p)
    p_mirror = min(1.0, len(cells) * best.test.p)
    shown = int(np.sign(best.test.z)) if p_mirror < alpha else 0
    numbers.update(
        {
            "p_mirror": p_mirror,
            "strongest": best.label,
            "strongest_z": best.test.z,
            "strongest_mean": best.test.mean,
        }
    )
    driven = abs(right_probability - 0.5) > 1e-12
    if transport is None:
        if driven:
            return AxisDrift(
                data.axis, data.periodic, "skip",
                "no transport law for the model: the direction cannot be judged",
                None, shown, p_mirror, numbers,
            )  # fmt: skip
        status = "fail" if p_mirror < alpha else "skip"
        return AxisDrift(
            data.axis, data.periodic, status,
            "mirror asymmetry" if status == "fail" else "no transport law to judge power",
            "driven" if status == "fail" else None, shown, p_mirror, numbers,
        )  # fmt: skip
    if not driven:
        return _symmetric(
            data, lags, ndim, transport, cells, p_mirror, shown, numbers, alpha, margin, flat,
            starts,
        )  # fmt: skip
    extra = None
    if centre is not None and profile is not None and edges is not None and not data.periodic:
        value, variance = centre
        variance += float(np.diff(edges).max()) ** 2 / 12.0  # the bins' resolution
        extra = _centre_size(profile_centre(profile, edges), value, variance, tolerance)
    return _driven(
        data, lags, ndim, right_probability, transport, cells, numbers, alpha, margin,
        tolerance, flat, extra, starts,
    )  # fmt: skip


def _symmetric(
    data: AxisSpacetime,
    lags: tuple[int, ...],
    ndim: int,
    transport: Transport,
    cells: list[_Cell],
    p_mirror: float,
    shown: int,
    numbers: dict[str, Any],
    alpha: float,
    margin: float,
    flat: bool,
    starts: np.ndarray,
) -> AxisDrift:
    if p_mirror < alpha:
        return AxisDrift(
            data.axis, data.periodic, "fail", "mirror asymmetry", "driven", shown, p_mirror,
            numbers,
        )  # fmt: skip
    usable = _usable(data, lags, 1.0, transport, ndim)
    sizes = _sizes(data, usable, 1.0, ndim, 0.5, flat, starts, lags)
    from ...analysis.tails import normal_isf  # scipy.special, on first use

    need = float(normal_isf(alpha / (2 * len(cells)))) + margin
    numbers["usable_lags"] = [int(lags[li]) for li in usable]
    numbers["required_score"] = need
    if sizes:
        top = max(sizes, key=lambda s: s.shows)
        numbers.update(_size_numbers(top, lags, "if totally asymmetric"))
        if top.shows >= need:
            numbers["smallest_detectable_drift"] = need / top.shows
            return AxisDrift(
                data.axis, data.periodic, "pass", "mirror-symmetric", None, 0, p_mirror, numbers
            )
        return AxisDrift(
            data.axis, data.periodic, "skip",
            f"too little signal: even a totally asymmetric drift would reach a score of only "
            f"{top.shows:.3g} (needed {need:.3g}) at lag {lags[top.lag]}",
            None, 0, p_mirror, numbers,
        )  # fmt: skip
    return AxisDrift(
        data.axis, data.periodic, "skip", _why_unusable(data, lags, usable, 1.0, transport, ndim),
        None, 0, p_mirror, numbers,
    )  # fmt: skip


def _driven(
    data: AxisSpacetime,
    lags: tuple[int, ...],
    ndim: int,
    right_probability: float,
    transport: Transport,
    cells: list[_Cell],
    numbers: dict[str, Any],
    alpha: float,
    margin: float,
    tolerance: float,
    flat: bool,
    extra: _Size | None,
    starts: np.ndarray,
) -> AxisDrift:
    sign = 1 if right_probability > 0.5 else -1
    drift = abs(2.0 * right_probability - 1.0)
    usable = _usable(data, lags, drift, transport, ndim)
    quarter = max(1, data.length // 4)
    direction = [
        c
        for c in cells
        if c.variant < 0
        or (c.lag >= 0 and (c.lag in usable or not data.periodic) and c.window <= quarter)
    ]
    numbers["usable_lags"] = [int(lags[li]) for li in usable]
    p_agree = p_opp = 1.0
    if direction:
        n = len(direction)
        p_agree = min(1.0, n * min(c.test.p_one_sided(sign) for c in direction))
        p_opp = min(1.0, n * min(c.test.p_one_sided(-sign) for c in direction))
        numbers.update({"p_declared_direction": p_agree, "p_other_direction": p_opp})
    if p_opp < alpha and p_opp < p_agree:
        return AxisDrift(
            data.axis, data.periodic, "fail", "driven the other way", "other-way", -sign, p_opp,
            numbers,
        )  # fmt: skip
    sizes = _sizes(data, usable, right_probability, ndim, tolerance, flat, starts, lags)
    if extra is not None:
        sizes.append(extra)
    if sizes:
        m = 2 * len(sizes)
        weak = min(sizes, key=lambda s: s.p_weak)
        strong = min(sizes, key=lambda s: s.p_strong)
        top = max(sizes, key=lambda s: s.detect)
        from ...analysis.tails import normal_isf  # scipy.special, on first use

        need = float(normal_isf(alpha / m)) + margin
        numbers["required_score"] = need
        if min(1.0, m * weak.p_weak) < alpha and (p_agree < alpha or weak.detect >= need):
            numbers.update(_size_numbers(weak, lags, "declared"))
            kind = "weaker" if p_agree < alpha else "symmetric"
            return AxisDrift(
                data.axis, data.periodic, "fail", "drift too weak", kind,
                sign if p_agree < alpha else 0, min(1.0, m * weak.p_weak), numbers,
            )  # fmt: skip
        if min(1.0, m * strong.p_strong) < alpha:
            numbers.update(_size_numbers(strong, lags, "declared"))
            return AxisDrift(
                data.axis, data.periodic, "fail", "drift too strong", "stronger", sign,
                min(1.0, m * strong.p_strong), numbers,
            )  # fmt: skip
        numbers.update(_size_numbers(top, lags, "declared"))
        if p_agree < alpha or top.detect >= need:
            return AxisDrift(
                data.axis, data.periodic, "pass", "agrees with the declared drift", None,
                sign if p_agree < alpha else 0, p_agree, numbers,
            )  # fmt: skip
        return AxisDrift(
            data.axis, data.periodic, "skip",
            f"too little signal: a mirror-symmetric axis would reach a score of only "
            f"{top.detect:.3g} (needed {need:.3g}) against the declared drift",
            None, 0, p_agree, numbers,
        )  # fmt: skip
    if p_agree < alpha:
        return AxisDrift(
            data.axis, data.periodic, "pass", "direction agrees (size not predicted)", None,
            sign, p_agree, numbers,
        )  # fmt: skip
    return AxisDrift(
        data.axis, data.periodic, "skip",
        _why_unusable(data, lags, usable, drift, transport, ndim),
        None, 0, p_agree, numbers,
    )  # fmt: skip


def _size_numbers(s: _Size, lags: tuple[int, ...], what: str) -> dict[str, Any]:
    ratio = s.measured / s.predicted if s.predicted else math.nan
    if s.lag < 0:
        return {
            "size_of": "centre of mass",
            "centre_of_mass": s.measured,
            "centre_of_mass_se": s.se,
            "centre_of_mass_predicted": s.predicted,
            "prediction": what + " steady state",
            "ratio": ratio,
            "score_against_symmetric": s.detect,
        }
    return {
        "size_of": "first moment",
        "size_lag": int(lags[s.lag]),
        "size_variant": VARIANTS[s.variant],
        "size_window": s.window,
        "first_moment": s.measured,
        "first_moment_se": s.se,
        "first_moment_predicted": s.predicted,
        "first_moment_predicted_se": s.predicted_se,
        "prediction": what,
        "ratio": ratio,
        "score_against_symmetric": s.detect,
        "score_of_prediction": s.shows,
    }


def _why_unusable(
    data: AxisSpacetime,
    lags: tuple[int, ...],
    usable: dict[int, tuple[float, float, tuple[int, ...]]],
    drift: float,
    transport: Transport,
    ndim: int,
) -> str:
    if usable:
        return (
            "no usable lag has a reliable prediction (too few starts, or the activity "
            "of the model is unknown)"
        )
    finite = [li for li in range(len(lags)) if np.isfinite(data.dt[:, :, li]).any()]
    if not finite:
        return "no pair of snapshots at any lag"
    li = min(finite, key=lambda i: float(np.nanmax(data.dt[:, :, i])))
    dt = float(np.nanmax(data.dt[:, :, li]))
    s = influence(dt, drift, transport, ndim)
    return (
        f"snapshots too far apart: in dt = {dt:.3g} (lag {lags[li]}) a fluctuation can travel "
        f"{s:.3g} sites, more than a quarter of the axis ({data.length // 4}); snapshots at "
        f"most {dt_for(data.length // 4, drift, transport, ndim):.3g} apart would decide"
    )
