"""The statistical seam test behind the ``boundary`` check.

Along one axis of length L the ``increments`` statistic follows the sign increments
s_i = sign(m_i(t) - m_i(t-1)) of consecutive snapshots at the seam pair (L-1, 0), at K_b
interior bonds (k, k+1) and at K_f distant pairs (k, k + L//2), (k, k + L//3). For each
pair it gives the
correlation r of s_i and s_j (negative for neighbours, because a move takes from one
site and gives to the other, one unit or a whole cluster, whatever the drift; near 0
for distant sites) and the *activity* a_i of each site (the centred sum of s_i^2, about the
number of snapshot pairs in which the site changed).

Correlation test
    Positions are summarised with precision weights w = sqrt(a_i a_j): weighted mean mu
    and unit variance s^2 = sum w (r - mu)^2 / (K - 1) of the reference kind. The seam is
    judged by the prediction statistic ``t = (r_seam - mu) / (s sqrt(1/w_seam + 1/sum w))``
    against Student's T with K - 1 degrees of freedom (one more draw of the same weighted
    normal sample).

    * Declared periodic. H0: the seam is a bond. On a ring every bond is a translate of
      the seam, so r_seam is exchangeable with the interior bonds; reference kind: bonds,
      one-sided, p = P(T >= t) (walls make r_seam larger, like a distant pair).
    * Declared reflecting or open. H0: the seam is not a bond; reference kind: distant
      pairs, one-sided, p = P(T >= -t) (a ring makes r_seam as negative as a bond).
      Walls are not translation invariant: a particle bouncing off a wall makes the end
      sites' increments anticorrelated in time, so the seam estimate can be noisier than
      a distant pair of the same weight. Its own batch-means variance over the
      (replica, block) batches replaces s^2 / w_seam when larger (degrees of freedom:
      the smaller of K - 1 and batches - 1).

Activity-step test (periodic axes only)
    On a ring the ordered seam pair (L-1, 0) is also a translate of every ordered bond
    (k, k+1), so the activity step ``log(1 + a_j) - log(1 + a_i)`` across the seam is
    exchangeable with the steps across interior bonds; it is judged against them by the
    two-sided prediction t-test. Walls with a drift show here even when the seam pair
    barely moves: the profile rises along the axis, every interior step is positive, and
    the step from the crowded last site to the empty first one is strongly negative. Not
    applied when the run declares a condensed start, which breaks translation invariance.

The p-value of a periodic axis is the Bonferroni combination ``min(1, 2 min(p))`` of the
correlation and the activity-step tests; of a reflecting or open axis, the correlation p.

Resolution. The correlation test tells walls from a ring only when bonds and distant
pairs differ clearly. The *separation* is the statistic a seam of the other kind would
get (that kind's mean and typical weight in place of the seam's). The axis is *resolved*
when such a seam would be caught even if it fell ``margin`` (default 2) of its kind's
standard deviations short of its mean, a power of about 0.98. Snapshots far apart
compared with the hop time wash the bond correlation out and leave the axis unresolved.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from .increments import AxisIncrements

__all__ = ["SeamTest", "seam_test"]


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


@dataclass(frozen=True)
class SeamTest:
    """Outcome of the seam test along one axis (see the module docstring).

    ``p_value`` is NaN when nothing could be tested (no pair moved).
    """

    axis: int
    boundary: str
    seam: float
    bond_mean: float
    bond_sd: float
    n_bond: int
    far_mean: float
    far_sd: float
    n_far: int
    statistic: float
    dof: int
    p_correlation: float
    p_activity: float | None
    p_value: float
    separation: float
    increments: int
    resolved: bool

    @property
    def cause(self) -> str:
        """Which test gave the smallest p: ``"correlation"`` or ``"activity"``."""
        act = self.p_activity
        if act is not None and math.isfinite(act) and not act >= self.p_correlation:
            return "activity"
        return "correlation"

    def values(self) -> dict[str, object]:
        """JSON-friendly summary for a check result."""
        return {
            "axis": self.axis,
            "boundary": self.boundary,
            "seam_correlation": _num(self.seam),
            "bond_correlation": _num(self.bond_mean),
            "far_correlation": _num(self.far_mean),
            "statistic": _num(self.statistic),
            "dof": self.dof,
            "p_correlation": _num(self.p_correlation),
            "p_activity": None if self.p_activity is None else _num(self.p_activity),
            "p_value": _num(self.p_value),
            "separation": _num(self.separation),
            "increments": self.increments,
            "resolved": self.resolved,
        }


@dataclass(frozen=True)
class _Kind:
    """Precision-weighted summary of the correlations of one kind of pair."""

    mean: float
    var_unit: float  # variance of r for unit weight
    total: float  # sum of weights
    n: int

    @property
    def sd(self) -> float:
        """Spread of one position of average weight."""
        if self.n < 2:
            return float("nan")
        return math.sqrt(self.var_unit * self.n / self.total)


def _summary(r: np.ndarray, w: np.ndarray) -> _Kind:
    ok = np.isfinite(r) & (w > 0)
    r, w = r[ok], w[ok]
    if len(r) < 2:
        return _Kind(float("nan"), float("nan"), float(w.sum()), len(r))
    mean = float(np.sum(w * r) / np.sum(w))
    var_unit = float(np.sum(w * (r - mean) ** 2) / (len(r) - 1))
    return _Kind(mean, var_unit, float(w.sum()), len(r))


def _prediction_p(value: float, sample: np.ndarray) -> float:
    """Two-sided p of one more draw ``value`` from the normal population of ``sample``."""
    n = len(sample)
    if n < 3 or not math.isfinite(value):
        return float("nan")
    sd = float(sample.std(ddof=1))
    t = (value - float(sample.mean())) / (max(sd, 1e-12) * math.sqrt(1.0 + 1.0 / n))
    return float(2.0 * stats.t.sf(abs(t), n - 1))


def _step_p(data: AxisIncrements, var_a: np.ndarray, var_b: np.ndarray) -> float:
    """Activity step across the seam against the steps across interior bonds."""
    step = np.log1p(np.clip(var_b, 0.0, None)) - np.log1p(np.clip(var_a, 0.0, None))
    kind = data.plan.kind
    return _prediction_p(float(step[kind == 0][0]), step[kind == 1])


def _batch_var(data: AxisIncrements, pair: int) -> tuple[float, int]:
    """Batch-means variance of the pooled correlation of one pair, by linearising the
    ratio over the (replica, block) batches; and the number of batches that moved."""
    cov, var_a, var_b = (x[:, :, pair].reshape(-1) for x in data.centred())
    used = (var_a > 0) | (var_b > 0)
    cov, var_a, var_b = cov[used], var_a[used], var_b[used]
    m = len(cov)
    ta, tb = float(var_a.sum()), float(var_b.sum())
    if m < 2 or ta <= 0 or tb <= 0:
        return float("nan"), m
    r = float(cov.sum()) / math.sqrt(ta * tb)
    influence = cov / math.sqrt(ta * tb) - 0.5 * r * (var_a / ta + var_b / tb)
    return float(m / (m - 1) * np.sum(influence**2)), m


def seam_test(
    data: AxisIncrements,
    boundary: str,
    *,
    alpha: float = 1e-4,
    margin: float = 2.0,
    activity: bool = True,
) -> SeamTest:
    """Judge the seam of one axis against its declared ``boundary`` (module docstring).

    ``activity=False`` leaves out the activity test of periodic axes.
    """
    cov, var_a, var_b = data.moments()
    weight = np.sqrt(np.clip(var_a, 0, None) * np.clip(var_b, 0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(weight > 0, cov / weight, np.nan)
    kind = data.plan.kind
    seam, w_seam = float(r[kind == 0][0]), float(weight[kind == 0][0])
    bonds = _summary(r[kind == 1], weight[kind == 1])
    far = _summary(r[kind == 2], weight[kind == 2])
    periodic = boundary == "periodic"
    ref, other, sign = (bonds, far, 1.0) if periodic else (far, bonds, -1.0)
    statistic = p_corr = separation = float("nan")
    dof = max(ref.n - 1, 0)
    resolved = False
    if math.isfinite(ref.var_unit) and ref.n >= 2:
        unit = max(ref.var_unit, 1e-24)
        if math.isfinite(seam) and w_seam > 0:
            var_seam = unit / w_seam
            if not periodic:
                # walls are not translation invariant: the seam sites may move unlike
                # distant pairs, so their own batch-means variance counts when larger
                var_bm, batches = _batch_var(data, int(np.flatnonzero(kind == 0)[0]))
                if math.isfinite(var_bm) and var_bm > var_seam:
                    var_seam, dof = var_bm, max(min(dof, batches - 1), 1)
            statistic = sign * (seam - ref.mean) / math.sqrt(var_seam + unit / ref.total)
            p_corr = float(stats.t.sf(statistic, dof))
        if other.n >= 2:
            # a seam of the other kind: its typical weight, mean and spread
            scale = math.sqrt(unit * (other.n / other.total + 1 / ref.total))
            gap = sign * (other.mean - ref.mean)
            separation = gap / scale
            needed = float(stats.t.isf(alpha, dof)) * scale + margin * other.sd
            resolved = bool(gap >= needed)
    p_act = _step_p(data, var_a, var_b) if periodic and activity else None
    ps = [p for p in (p_corr, p_act) if p is not None and math.isfinite(p)]
    p_value = min(1.0, len(ps) * min(ps)) if ps else float("nan")
    return SeamTest(
        axis=data.plan.axis,
        boundary=boundary,
        seam=seam,
        bond_mean=bonds.mean,
        bond_sd=bonds.sd,
        n_bond=bonds.n,
        far_mean=far.mean,
        far_sd=far.sd,
        n_far=far.n,
        statistic=statistic,
        dof=dof,
        p_correlation=p_corr,
        p_activity=p_act,
        p_value=p_value,
        separation=separation,
        increments=data.n_increments,
        resolved=resolved,
    )
