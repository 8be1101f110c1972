"""The statistical tests of the ``boundary`` check, on reconstructed bond transfers.

Along an axis of L sites, consecutive snapshots give the transfer across every bond up to
one constant per snapshot interval: x_k = C - sum_{i<=k} Dm_i, with C = 0 behind a wall,
the inflow increment at an open end, and the unknown seam transfer on a ring (then every
x_k is shifted by the same -C). In 2D the masses summed over the other axis obey the same
continuity. The statistic keeps x at fixed bonds for a sample of intervals; y denotes the
change of a transfer from one kept interval to the next (a steady current or a slowly
drifting profile cancels in it). Block means are taken over (replica, block) pairs: each
replica's kept intervals cut into up to ``BLOCKS`` consecutive blocks of at least
``MIN_BLOCK``.

Spreading distance
    The mass change of the sites between two bonds a distance d apart, x_a - x_b, does not
    depend on C. Its variance S(d) (centred within (replica, block) pairs, pooled) rises
    with d while segments are shorter than the distance mass travels between snapshots and
    levels off beyond it. The spreading distance ``ell`` is where S reaches half its value
    at half the axis, interpolated in log d. When snapshots are so far apart that they are
    effectively independent samples, ``ell`` is a sizeable fraction of L.

Declared periodic: the ring test (exact)
    H0: the axis is a ring whose law is invariant under rotations by L/K sites (a ring
    started from a rotation-invariant law, stationary or not). Then the K ring cuts are
    translates of each other, and any statistic computed the same way at every cut has the
    seam's rank uniform on 1..K in each replica, independently across replicas. Per
    replica, one of two statistics is used, chosen by a rotation-invariant feature of that
    replica's data (so the choice does not disturb the law of the rank):

    * *shares* (when at least half of the K segments between cuts ever change mass): each
      cut's mean share |T_s| / sum_s |T_s| over the intervals, T_s = x_s - mean_s(x) (free
      of C, bounded so that a few huge cluster moves cannot dominate). Behind walls the seam
      carries nothing and ranks first; while a current still flows into a wall it ranks
      high;
    * *profile* (otherwise: most of the axis is frozen): the time-averaged density just
      left of the cut minus just right of it. A pile of mass against a wall, as a drift
      builds between walls, puts the seam at the top or the bottom in every replica.

    Statistic: the sum s_obs of the seam's mid-ranks over the R replicas. p-value:
    two-sided, 2 min(P(S <= s_obs), P(S >= s_obs)) for S a sum of R independent uniform
    ranks on 1..K (exact, by convolution; mid-ranks rounded outwards). The smallest
    reachable p is 2 K^-R: with 4 replicas it needs K >= 12 to go below 1e-4.
    Decided when a wall would be caught: the shares test with the seam replaced by a
    *shifted copy* of the end cut (cut s taken s intervals later, which keeps every cut's
    own law and breaks the common shift that makes a ring) gives p < alpha, provided the
    wall pair below is at least ``reach`` spreading distances apart (the stand-in assumes
    cuts nearly independent once the common shift is gone); or the wall test below rejects
    walls (the data show a ring's common shift); or the run declares itself stationary with
    a drift strong enough that walls would pile the mass within one ring segment of a wall
    (:func:`piles`), which the profile ranks catch in every replica.

Declared reflecting or open: the wall test
    H0: x are the true transfers (C = 0, or the recorded inflow increments). The *wall
    pair* sits at about L/3 and 2L/3, cutting the axis into three arcs. On a ring the three
    arcs are translates whose mass changes sum to zero, so the reconstructed transfers of
    the pair (minus the first arc's change, plus the last arc's) have correlation exactly
    1/2 whatever the dynamics. Behind walls the end arcs exchange mass through one bond
    only: when mass spreads over much less than a third of the axis between snapshots, the
    pair's transfers are nearly independent; when it spreads over the whole axis, walls and
    a ring look alike (their arcs are all renewed) and the correlation rises towards 1/2.
    Per (replica, block) pair, rho is the Pearson correlation of the normal scores (ranks
    within the block: robust to heavy-tailed cluster moves and to a condensate) of the
    pair's changes y. Statistic: t = (mean rho - rho0) / its standard error over the n
    (replica, block) pairs (time correlation and per-replica features stay inside them).
    p-value: one-sided Student t, P(T >= t), with n - 1 degrees of freedom. rho0 is the
    correlation tolerated behind walls: ``tolerance`` while the pair is less than 2
    ``reach`` spreading distances apart, then shrinking in proportion to the distance, never
    below ``floor`` (measured behind walls: up to about 0.2 at 3 to 4.5 spreading distances
    on short axes whose fluid is nearly renewed between snapshots, below 0.1 beyond 5; see
    docs/calibration-boundary.md).
    Tested only when the pair is at least ``reach`` spreading distances apart (a steady
    stream counts: S(d) grows until d is the distance it carries mass in one interval, so
    its spreading distance is half that, and the pair is farther apart than it travels).
    Decided when a ring would be caught: (rho_ring - rho0) / se must reach the critical t
    plus ``margin``; or, for walls, the ring test rejects the ring (the data are not a ring).
    Walls pass only when the data also reject a ring, as the wall test rejects walls:
    (rho_ring - mean rho) / se must reach the critical t. Power alone passed a ring whose
    pair correlated by 0.29, between the 0.15 walls tolerate and the 0.44 its turns showed
    (measured: symmetric CMAM rings, L = 200, a snapshot every 10 hop times, declared
    walls, 1 of 50 passed); such an axis is undecided (``between``).
    rho_ring is what a ring of these data would show. Pearson's correlation is 1/2, but
    the mean over blocks of the normal-score correlation is lower: short blocks bias a
    correlation towards 0, and so do a few huge moves carrying the changes (measured:
    symmetric condensed ZRP rings, L = 200, a snapshot every 1000 hop times, 0.33 to 0.5;
    taking 1/2 passed 2 of 20 such rings declared as walls). The arcs' changes are observed
    whatever the boundary, and on a ring the pair turned by a third, (-A2, A1), and by two
    thirds, (-A3, A2), have the law of the pair itself: rho_ring is the mean normal-score
    correlation of the three, at most 1/2. Behind walls the turned pairs share a bond and
    correlate (about 1/sqrt(2) for independent bond transfers), so rho_ring stays near 1/2.
    On an open axis the transfers carry the recorded inflow, the turns do not apply, and
    rho_ring is 1/2.
    With a declared total drift (right probability 1 or 0) every transfer has the drift's
    sign: a transfer against it is an exact contradiction (p = 0).

An open axis without a usable inflow record (missing, or several open axes sharing it) is
tested only through the drift rule.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field

import numpy as np

from .transfers import AxisTransfers, TransferPlan

__all__ = [
    "BLOCKS",
    "FLOOR",
    "MIN_BLOCK",
    "REACH",
    "RING_CORRELATION",
    "TOLERANCE",
    "AxisVerdict",
    "Extreme",
    "RingTest",
    "Spreading",
    "WallTest",
    "judge_axis",
    "piles",
    "ring_test",
    "spreading",
    "sum_of_ranks_cdf",
    "tolerated",
    "wall_test",
]

#: Shortest distance between the wall pair, in spreading distances, for the wall test.
REACH = 2.5
#: The correlation tolerated between the wall pair up to 2 ``REACH`` spreading distances.
TOLERANCE = 0.3
#: The least correlation tolerated, however far apart the pair is.
FLOOR = 0.15
#: The Pearson correlation of the transfers at a third and two thirds of a ring, cut at its
#: seam: exactly 1/2 (the three arcs' mass changes are exchangeable and sum to zero).
RING_CORRELATION = 0.5
#: Blocks per replica (of the block means).
BLOCKS = 16
#: Fewest snapshot intervals in a block.
MIN_BLOCK = 8


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


# -- blocks ----------------------------------------------------------------------------------


def _runs(valid: np.ndarray) -> np.ndarray:
    """Kept intervals j whose successor j + 1 is kept too (a change y_j is defined)."""
    return np.flatnonzero(valid[:-1] & valid[1:])


def _blocks(n: int) -> list[slice]:
    """Up to :data:`BLOCKS` consecutive slices of ``n`` items, each >= :data:`MIN_BLOCK`."""
    nb = min(BLOCKS, n // MIN_BLOCK)
    if nb < 1:
        return []
    edges = np.linspace(0, n, nb + 1).astype(np.int64)
    return [slice(int(a), int(b)) for a, b in itertools.pairwise(edges)]


# -- spreading distance ----------------------------------------------------------------------


@dataclass(frozen=True)
class Spreading:
    """Variance of segment changes ``s`` at segment lengths ``distance``; ``ell``."""

    distance: np.ndarray
    s: np.ndarray
    ell: float


def spreading(data: AxisTransfers) -> Spreading:
    """The spreading distance of one axis (module docstring)."""
    plan = data.plan
    nc = len(plan.class_dist)
    sq = np.zeros(nc)
    cnt = np.zeros(nc)
    for r in range(data.x.shape[0]):
        rows = np.flatnonzero(data.valid[r])
        seg = (data.x[r, rows][:, plan.seg_a] - data.x[r, rows][:, plan.seg_b]).astype(float)
        for sl in _blocks(len(rows)):
            d = seg[sl]
            dev = (d - d.mean(axis=0)) ** 2
            sq += np.bincount(plan.seg_c, weights=dev.sum(axis=0), minlength=nc)
            cnt += np.bincount(plan.seg_c, minlength=nc) * len(d)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.where(cnt > 0, sq / np.maximum(cnt, 1), np.nan)
    return Spreading(plan.class_dist, s, _half_rise(plan.class_dist, s))


def _half_rise(d: np.ndarray, s: np.ndarray) -> float:
    ok = np.isfinite(s)
    d, s = d[ok], s[ok]
    if len(s) == 0 or not s[-1] > 0:
        return float("nan")
    f = s / s[-1]
    i = int(np.flatnonzero(f >= 0.5)[0])
    if i == 0:
        return float(d[0] * min(1.0, 0.5 / f[0]))  # S grows about linearly below d[0]
    lo, hi = math.log(d[i - 1]), math.log(d[i])
    w = (0.5 - f[i - 1]) / (f[i] - f[i - 1])
    return float(math.exp(lo + w * (hi - lo)))


# -- the ring test ---------------------------------------------------------------------------


def sum_of_ranks_cdf(replicas: int, k: int, s: float) -> float:
    """P(sum of ``replicas`` independent uniform ranks on 1..k <= s).

    >>> round(sum_of_ranks_cdf(2, 6, 3), 6)  # (1,1), (1,2), (2,1) of 36
    0.083333
    """
    if replicas < 1 or k < 1:
        return 1.0
    p = np.ones(1)
    for _ in range(replicas):
        p = np.convolve(p, np.full(k, 1.0 / k))
    values = np.arange(replicas, replicas * k + 1)
    return float(min(1.0, p[values <= math.floor(s + 1e-9)].sum()))


def _two_sided(reps: int, k: int, s: float) -> float:
    """Two-sided p of a rank sum ``s``: the law of the sum is symmetric about R (K+1)/2."""
    low = sum_of_ranks_cdf(reps, k, math.ceil(s))
    high = sum_of_ranks_cdf(reps, k, reps * (k + 1) - math.floor(s))
    return min(1.0, 2.0 * min(low, high))


def _rank_in(value: float, others: np.ndarray) -> float:
    """Mid-rank (1-based) of ``value`` among ``others`` and itself."""
    return float(np.sum(others < value) + 1 + np.sum(others == value) / 2)


def _shares(v: np.ndarray) -> np.ndarray:
    """|T_s| / sum_s |T_s| per row, T = v - row mean (1/K each when all are equal)."""
    t = np.abs(v - v.mean(axis=1, keepdims=True))
    total = t.sum(axis=1, keepdims=True)
    return np.where(total > 0, t / np.where(total > 0, total, 1.0), 1.0 / v.shape[1])


def _shifted(v: np.ndarray, lag: int = 1) -> np.ndarray:
    """Column s taken ``s * lag`` rows later (cyclically)."""
    m, k = v.shape
    rows = (np.arange(m)[:, None] + np.arange(k)[None, :] * lag) % m
    return v[rows, np.arange(k)[None, :]]


@dataclass(frozen=True)
class RingTest:
    """Outcome of the ring test (declared periodic); ranks and modes are per replica."""

    k: int
    exact: bool
    modes: tuple[str, ...]
    seam_ranks: tuple[float, ...]
    p_value: float
    wall_ranks: tuple[float, ...]
    p_wall: float

    @property
    def replicas(self) -> int:
        return len(self.seam_ranks)


def ring_test(data: AxisTransfers) -> RingTest:
    """The seam's rank among the ring cuts of each replica (module docstring)."""
    plan = data.plan
    k = plan.ring_k
    lengths = np.diff(plan.ring_cuts, prepend=-1).astype(float)
    modes: list[str] = []
    seam: list[float] = []
    wall: list[float] = []
    for r in range(data.x.shape[0]):
        rows = np.flatnonzero(data.valid[r])
        if len(rows) == 0:
            continue
        v = data.x[r, rows][:, plan.ring].astype(float)
        changed = int(((np.roll(v, 1, axis=1) - v) != 0).any(axis=0).sum())
        if 2 * changed >= k:
            means = _shares(v).mean(axis=0)
            modes.append("shares")
            seam.append(_rank_in(float(means[-1]), means[:-1]))
            if len(rows) > 1:
                end = float(_shares(_shifted(v))[:, -1].mean())
                wall.append(_rank_in(end, means[:-1]))
        else:
            density = data.profile[r] / lengths
            contrast = density - np.roll(density, -1)  # left of cut s minus right of it
            modes.append("profile")
            seam.append(_rank_in(float(contrast[-1]), contrast[:-1]))
    reps = len(seam)
    p = _two_sided(reps, k, sum(seam)) if reps else float("nan")
    p_wall = _two_sided(len(wall), k, sum(wall)) if wall else float("nan")
    return RingTest(k, plan.ring_exact, tuple(modes), tuple(seam), p, tuple(wall), p_wall)


# -- the wall test ---------------------------------------------------------------------------


@dataclass(frozen=True)
class WallTest:
    """Outcome of the wall test (declared reflecting or open).

    ``bonds`` of the pair ``spacing`` sites apart; ``scale``, the spreading distance;
    tolerance ``rho0``; over ``blocks`` (replica, block) pairs the ``mean`` correlation with
    its standard error, t statistic, degrees of freedom and p-value (NaN when fewer than 3
    blocks moved).
    """

    bonds: tuple[int, int]
    spacing: int
    scale: float
    rho0: float
    mean: float
    se: float
    statistic: float
    dof: int
    p_value: float
    blocks: int
    ring_like: float = RING_CORRELATION

    def caught(self, alpha: float, margin: float) -> bool:
        """Whether a ring would fail: (rho_ring - rho0) / se must reach the critical t plus
        ``margin``, rho_ring the correlation of normal scores a ring of these data would
        show (``ring_like``, at most 1/2; module docstring)."""
        return self._below_ring(self.rho0, alpha, margin)

    def ring_rejected(self, alpha: float) -> bool:
        """Whether the data reject a ring at ``alpha``: the pair's mean correlation lies
        below ``ring_like`` by at least the critical one-sided t (the mirror of the wall
        test, which rejects walls when it lies above ``rho0``)."""
        return self._below_ring(self.mean, alpha, 0.0)

    def _below_ring(self, rho: float, alpha: float, margin: float) -> bool:
        """(ring_like - rho) / se reaches the critical one-sided t plus ``margin``."""
        if not (self.dof > 0 and math.isfinite(self.se) and math.isfinite(self.ring_like)):
            return False
        from ...analysis.tails import student_isf  # scipy.special, imported on first use

        return (self.ring_like - rho) / self.se >= student_isf(alpha, self.dof) + margin


def _normal_scores(y: np.ndarray) -> np.ndarray:
    """Columns of ``y`` replaced by the normal scores of their mid-ranks."""
    from ...analysis.tails import average_ranks, normal_ppf  # scipy.special, on first use

    r = average_ranks(y, axis=0)
    return normal_ppf(r / (len(y) + 1))


def _pair_correlation(a: np.ndarray, b: np.ndarray) -> float:
    """Pearson correlation of the normal scores of ``a`` and ``b``; NaN if one is constant."""
    if np.all(a == a[0]) or np.all(b == b[0]):
        return float("nan")
    z = _normal_scores(np.stack([a, b], axis=1))
    z -= z.mean(axis=0)
    return float((z[:, 0] @ z[:, 1]) / math.sqrt((z[:, 0] @ z[:, 0]) * (z[:, 1] @ z[:, 1])))


def tolerated(distance: float, *, reach: float, tolerance: float, floor: float) -> float:
    """rho0: ``tolerance`` up to 2 ``reach`` spreading distances apart, then shrinking in
    proportion to the distance, never below ``floor`` (module docstring).

    >>> tolerated(4.0, reach=2.5, tolerance=0.3, floor=0.15), tolerated(10.0, reach=2.5,
    ...     tolerance=0.3, floor=0.15)
    (0.3, 0.15)
    """
    return max(floor, tolerance * min(1.0, 2.0 * reach / distance))


def wall_test(
    data: AxisTransfers,
    ell: float,
    *,
    reach: float = REACH,
    tolerance: float = TOLERANCE,
    floor: float = FLOOR,
) -> WallTest | None:
    """Correlation of the wall pair's changes above the tolerance (module docstring); None
    when the pair is less than ``reach`` spreading distances apart."""
    plan = data.plan
    a, b = (int(i) for i in plan.wall)
    bonds = (int(plan.pair[0]), int(plan.pair[1]))
    spacing = bonds[1] - bonds[0]
    scale = ell
    if not (math.isfinite(scale) and scale > 0 and spacing >= reach * scale):
        return None
    rho0 = tolerated(spacing / scale, reach=reach, tolerance=tolerance, floor=floor)
    per: list[float] = []
    turned: list[float] = []
    for r in range(data.x.shape[0]):
        j = _runs(data.valid[r])
        if len(j) == 0:
            continue
        y = (data.x[r, j + 1] - data.x[r, j]).astype(float)  # changes, kept intervals
        for sl in _blocks(len(j)):
            per.append(_pair_correlation(y[sl, a], y[sl, b]))
            turned.append(_turned_correlation(y[sl, a], y[sl, b]))
    v = np.array([x for x in per if math.isfinite(x)])
    m = len(v)
    nan = float("nan")
    if m < 3:
        return WallTest(bonds, spacing, scale, rho0, nan, nan, nan, 0, nan, m)
    mean = float(v.mean())
    se = max(float(v.std(ddof=1) / math.sqrt(m)), 1e-12)
    t = (mean - rho0) / se
    from ...analysis.tails import student_sf  # scipy.special, imported on first use

    p = float(student_sf(t, m - 1))
    cyclic = [x for x in turned if math.isfinite(x)]
    ring_like = min(RING_CORRELATION, float(np.mean(cyclic))) if cyclic else nan
    if data.constant != "zero":  # open ends: x holds the inflow, not the arcs' changes alone
        ring_like = RING_CORRELATION
    return WallTest(bonds, spacing, scale, rho0, mean, se, t, m - 1, p, m, ring_like)


def _turned_correlation(ya: np.ndarray, yb: np.ndarray) -> float:
    """Mean normal-score correlation of the wall pair and of its two turns by a third.

    With A1, A2, A3 the mass changes of the three arcs (observed whatever the boundary),
    the pair's changes are (-A1, A3) = (ya, yb); turning the arcs by a third gives
    (-A2, A1) = (yb - ya, -ya) and (-A3, A2) = (-yb, ya - yb). On a ring the three are
    translates of one another, so the three pairs share one law and their mean estimates
    the correlation a ring shows: 1/2 for Pearson's, less for normal scores when a few
    huge moves (a condensate relocating) carry the changes. NaN if one is constant."""
    pairs = ((ya, yb), (yb - ya, -ya), (-yb, ya - yb))
    rho = [_pair_correlation(u, w) for u, w in pairs]
    return float(np.mean(rho)) if all(math.isfinite(x) for x in rho) else float("nan")


# -- the verdict -----------------------------------------------------------------------------


@dataclass(frozen=True)
class Extreme:
    """A reconstructed transfer and where it is: the replica, the snapshot pair
    (``snapshot - 1``, ``snapshot``) and the bond."""

    value: int
    replica: int
    snapshot: int
    bond: int


def _extreme(data: AxisTransfers, sign: int) -> Extreme | None:
    """The smallest (``sign`` 1) or largest (-1) kept transfer."""
    if not data.valid.any():
        return None
    x = np.where(data.valid[:, :, None], sign * data.x, np.iinfo(np.int64).max)
    r, j, p = np.unravel_index(int(np.argmin(x)), x.shape)
    bond = int(data.plan.positions[p])
    return Extreme(int(data.x[r, j, p]), int(r), int(j) * data.stride + 1, bond)


@dataclass(frozen=True)
class AxisVerdict:
    """The judgement of one axis: ``outcome`` is ``"pass"``, ``"fail"`` or ``"undecided"``.

    ``reason`` says what failed or why the axis is undecided; ``p_value`` is NaN when
    nothing was tested.
    """

    axis: int
    boundary: str
    length: int
    outcome: str
    p_value: float
    ell: float
    reason: str
    ring: RingTest | None = None
    wall: WallTest | None = None
    against_drift: Extreme | None = None
    values: dict[str, object] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.values["outcome"] = self.outcome  # the JSON summary says how the axis ended


def _drift_contradiction(data: AxisTransfers, right_probability: float | None) -> Extreme | None:
    if right_probability == 1.0:
        low = _extreme(data, 1)
        return low if low is not None and low.value < 0 else None
    if right_probability == 0.0:
        high = _extreme(data, -1)
        return high if high is not None and high.value > 0 else None
    return None


def _moves(data: AxisTransfers) -> bool:
    """Whether any kept segment ever changed mass (the mass moves at all)."""
    x = data.x[data.valid]
    return bool(len(x)) and bool((x != x[:, :1]).any())


def piles(right_probability: float | None, plan: TransferPlan) -> bool:
    """Whether walls would pile the mass against one of them within one ring segment.

    Stationary walls carry no net current, so with moves to the right with probability p
    the activity grows by p / (1 - p) per site towards the right wall (ZRP, CMAM, any model
    whose move direction is drawn apart from the rest): it decays over
    1 / |ln(p / (1 - p))| sites. When that is at most the spacing of the ring cuts, the
    rest of the axis is frozen and the profile ranks put the seam first or last in every
    replica (p = 2 K^-R): a wall would be caught.

    >>> from massarc.validators.checks.boundary.transfers import plan_axis
    >>> plan = plan_axis(0, 200)  # 50 ring cuts, 4 sites apart
    >>> piles(0.8, plan), piles(0.55, plan), piles(None, plan)
    (True, False, False)
    """
    p = right_probability
    if p is None or p == 0.5:
        return False
    if p in (0.0, 1.0):
        return True
    return 1.0 / abs(math.log(p / (1.0 - p))) <= plan.length / plan.ring_k


def judge_axis(
    data: AxisTransfers,
    boundary: str,
    *,
    alpha: float = 1e-4,
    margin: float = 2.0,
    reach: float = REACH,
    tolerance: float = TOLERANCE,
    floor: float = FLOOR,
    right_probability: float | None = None,
    invariant_start: bool = True,
    stationary: bool = False,
    carried: float = 0.0,
) -> AxisVerdict:
    """Judge one axis against its declared ``boundary`` (module docstring).

    ``right_probability``: the declared probability of a move towards +1 (None: not
    declared). ``invariant_start``: False when the run declares a start that no rotation
    leaves unchanged (all mass on one site): the ring test is then not used.
    ``stationary``: the run declares itself stationary (a declared drift then piles mass
    against a wall; see :func:`piles`). ``carried``: the sites the declared drift carries a
    fluctuation between snapshots (:func:`massarc.validators.analysis.transport.carried`):
    a travelling wave correlates the transfers of distant bonds, on a ring with the seam
    too, which lowers a ring's pair correlation below 1/2; walls are then passed only when
    the pair is ``reach`` spreading distances plus ``carried`` apart (measured: driven ZRP
    rings, L = 200, a snapshot every 100 hop times, declared walls, passed 5 times in 50
    with the pair 3.9 spreading distances apart and a wave carrying about 40 sites).
    """
    ell = spreading(data).ell
    length = data.plan.length
    ring = ring_test(data) if invariant_start else None
    wall = wall_test(data, ell, reach=reach, tolerance=tolerance, floor=floor)
    if data.constant == "unknown":
        wall = None
    values: dict[str, object] = {
        "axis": data.plan.axis,
        "boundary": boundary,
        "length": length,
        "spreading_distance": _num(ell),
        "intervals": data.intervals,
        "p_value": None,
    }
    if ring is not None:
        values["ring"] = {
            "cuts": ring.k,
            "modes": list(ring.modes),
            "seam_ranks": list(ring.seam_ranks),
            "p_value": _num(ring.p_value),
            "p_if_walls": _num(ring.p_wall),
        }
    if wall is not None:
        values["wall"] = {
            "bonds": list(wall.bonds),
            "scale": _num(wall.scale),
            "tolerance": _num(wall.rho0),
            "correlation": _num(wall.mean),
            "statistic": _num(wall.statistic),
            "dof": wall.dof,
            "p_value": _num(wall.p_value),
            "ring_correlation": _num(wall.ring_like),
        }
    if carried > 0:
        values["carried"] = _num(carried)
    base = {"axis": data.plan.axis, "boundary": boundary, "length": length, "ell": ell}
    extra = {"ring": ring, "wall": wall, "values": values}
    moving = _moves(data)
    walls_rejected = wall is not None and math.isfinite(wall.p_value) and wall.p_value < alpha
    ring_rejected = ring is not None and math.isfinite(ring.p_value) and ring.p_value < alpha

    def verdict(outcome: str, p: float, reason: str, **more) -> AxisVerdict:
        values["p_value"] = _num(p)
        values["reason"] = reason
        return AxisVerdict(**base, outcome=outcome, p_value=p, reason=reason, **{**extra, **more})

    if boundary == "periodic":
        if ring_rejected:
            assert ring is not None
            return verdict("fail", ring.p_value, "seam")
        p = ring.p_value if ring is not None else float("nan")
        caught = ring is not None and math.isfinite(ring.p_wall) and ring.p_wall < alpha
        # the stand-in wall assumes cuts independent once the common shift is gone: only
        # when mass spreads over much less than a third of the axis (as for the wall test)
        spread = float(data.plan.pair[1] - data.plan.pair[0])
        caught &= bool(math.isfinite(ell) and spread >= reach * ell)
        if caught and not (ring is not None and ring.exact):  # cuts only nearly translates
            caught = length / data.plan.ring_k >= reach * ell
        pile = ring is not None and stationary and piles(right_probability, data.plan)
        if caught or walls_rejected or pile:
            return verdict("pass", p, "pile" if pile and not (caught or walls_rejected) else "")
        reason = "start" if ring is None else ("still" if not moving else "power")
        return verdict("undecided", p, reason)
    against = _drift_contradiction(data, right_probability) if data.constant != "unknown" else None
    if against is not None:
        return verdict("fail", 0.0, "drift", against_drift=against)
    if data.constant == "unknown":
        return verdict("undecided", float("nan"), "inflow")
    if walls_rejected:
        assert wall is not None
        return verdict("fail", wall.p_value, "common")
    p = wall.p_value if wall is not None else float("nan")
    resolved = wall is not None and wall.caught(alpha, margin)
    if resolved and wall is not None and carried > 0:
        resolved = wall.spacing >= reach * ell + carried
    between = resolved and wall is not None and not wall.ring_rejected(alpha)
    resolved = resolved and not between
    if boundary == "reflecting" and ring_rejected:
        resolved = True  # the data are not a ring
    if resolved:
        return verdict("pass", p, "")
    if not moving:
        reason = "still"
    elif wall is None:
        reason = "spread"
    elif carried > 0 and wall.spacing < reach * ell + carried:
        reason = "wave"
    elif between:
        reason = "between"
    else:
        reason = "power"
    return verdict("undecided", p, reason)
