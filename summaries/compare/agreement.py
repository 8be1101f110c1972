"""The two-sample tests of ``compare`` and the multiplicity correction.

Each test takes what both runs observed in their stationary windows, with effective sizes
(:mod:`.observed`), and returns a :class:`TestOutcome`: statistic, degrees of freedom,
p-value, effective sizes and what was tested. Sizes enter only through the effective number
of independent draws, so that a run whose snapshots repeat each other (strong
autocorrelation) weighs no more than its independent information.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from massarc.validators.analysis.binning import merge_bins

__all__ = [
    "TestOutcome",
    "correlation_test",
    "holm",
    "largest_mass_test",
    "occupation_test",
]


@dataclass(frozen=True)
class TestOutcome:
    """One test: its statistic, the p-value, and the effective sizes it used."""

    statistic: float
    p_value: float
    dof: float | None
    sizes: tuple[float, float]
    detail: dict[str, Any] = field(default_factory=dict)


def occupation_test(
    counts_a: np.ndarray,
    counts_b: np.ndarray,
    efficiency: tuple[float, float],
    *,
    min_expected: float = 5.0,
) -> TestOutcome:
    """G test of homogeneity of the two occupation laws P(m), on effective counts.

    H0: the single-site masses of both runs' stationary windows follow one law P(m).
    Each run's counts (sites x snapshots x replicas pooled) are scaled by its efficiency
    (effective draws per draw, :mod:`.observed`); bins are merged from m = 0 upward until
    each merged bin expects at least ``min_expected`` effective counts in the smaller run
    (common practice: at least 5). Statistic: G = 2 sum O ln(O / E) over the 2 x k table of
    effective counts, E from the pooled law (``scipy.stats.chi2_contingency`` with
    ``lambda_="log-likelihood"``). p-value: the chi-square law with k - 1 degrees of
    freedom, P(chi2_(k-1) >= G).
    """
    a = np.asarray(counts_a, dtype=np.float64) * efficiency[0]
    b = np.asarray(counts_b, dtype=np.float64) * efficiency[1]
    n = max(len(a), len(b))
    a, b = np.pad(a, (0, n - len(a))), np.pad(b, (0, n - len(b)))
    size_a, size_b = float(a.sum()), float(b.sum())
    pooled = (a + b) / (size_a + size_b)
    groups = merge_bins(pooled * min(size_a, size_b), min_expected, max_bins=n)
    table = np.array([[x[g0 : g1 + 1].sum() for g0, g1 in groups] for x in (a, b)])
    if table.shape[1] < 2:
        return TestOutcome(0.0, 1.0, 0.0, (size_a, size_b), {"bins": len(groups)})
    g, p, dof, _ = stats.chi2_contingency(table, correction=False, lambda_="log-likelihood")
    worst = int(np.argmax(np.abs(table[0] / size_a - table[1] / size_b)))
    g0, g1 = groups[worst]
    detail = {
        "bins": len(groups),
        "largest_difference": {
            "masses": [g0, g1],
            "a": float(table[0, worst] / size_a),
            "b": float(table[1, worst] / size_b),
        },
    }
    return TestOutcome(float(g), float(p), float(dof), (size_a, size_b), detail)


def largest_mass_test(a: np.ndarray, b: np.ndarray, draws: tuple[float, float]) -> TestOutcome:
    """Two-sample Kolmogorov-Smirnov test of the largest-mass distributions, with effective
    sizes.

    H0: the largest mass of a snapshot in both runs' stationary windows follows one law.
    Statistic: D = sup_m |F_a(m) - F_b(m)| of the two empirical distributions over every
    (replica, snapshot) of the windows (``scipy.stats.ks_2samp``). p-value: the
    asymptotic two-sample law as ``scipy.stats.ks_2samp(method="asymp")`` computes it,
    ``scipy.stats.kstwo.sf(D, round(n_a n_b / (n_a + n_b)))``, with n_a, n_b the
    effective draws instead of the counts of snapshots (ties of the integer masses make it
    conservative).
    """
    x, y = np.ravel(a), np.ravel(b)
    d = float(stats.ks_2samp(x, y).statistic)
    na, nb = draws
    en = max(1, round(na * nb / (na + nb)))
    p = float(stats.kstwo.sf(d, en))
    below = np.union1d(x, y)
    gaps = np.abs(np.searchsorted(np.sort(x), below, side="right") / x.size
                  - np.searchsorted(np.sort(y), below, side="right") / y.size)  # fmt: skip
    at = float(below[int(np.argmax(gaps))])
    detail = {"at_mass": at, "mean": [float(x.mean()), float(y.mean())]}
    return TestOutcome(d, min(1.0, p), float(en), (float(na), float(nb)), detail)


def correlation_test(
    a: np.ndarray,
    b: np.ndarray,
    draws: tuple[float, float],
    *,
    distances: int = 4,
) -> TestOutcome:
    """Wald test of equal two-point functions G(r), r = 0 .. k-1, from the probes.

    H0: the time-averaged G(r) of both runs' stationary windows are equal at r = 0 .. k-1.
    Each run gives one G row per probe inside its window (already averaged over replicas);
    its mean over the probes has covariance S / K_eff, with S the covariance of the rows
    (ddof = 1) and K_eff the effective number of probes (:mod:`.observed`). Statistic:
    Hotelling's two-sample T^2 = d' (S_a / K_a + S_b / K_b)^(-1) d, d the difference of the
    means; k = min(``distances``, (K_a + K_b - 2) / 4) so the covariance is estimated
    from at least four effective probes per distance. p-value: the F approximation of
    Hotelling's law, P(F(k, nu - k + 1) >= T^2 (nu - k + 1) / (nu k)), nu = K_a + K_b - 2
    (common practice). A distance where both runs have no variance is left out.
    """
    ka, kb = draws
    nu = ka + kb - 2.0
    k = int(min(distances, a.shape[1], b.shape[1], math.floor(nu / 4.0)))
    if k < 1 or len(a) < 2 or len(b) < 2:
        raise ValueError(
            f"too few independent probes in the windows ({ka:.3g} and {kb:.3g}; expected "
            "at least 3 in all)"
        )
    xa, xb = a[:, :k], b[:, :k]
    diff = xa.mean(axis=0) - xb.mean(axis=0)
    cov = (
        np.atleast_2d(np.cov(xa, rowvar=False)) / ka + np.atleast_2d(np.cov(xb, rowvar=False)) / kb
    )
    keep = np.flatnonzero(np.diag(cov) > 0)
    if keep.size == 0:
        same = bool(np.allclose(diff, 0.0))
        p = 1.0 if same else 0.0
        return TestOutcome(0.0 if same else math.inf, p, 0.0, (ka, kb), {"distances": k})
    diff, cov = diff[keep], cov[np.ix_(keep, keep)]
    t2 = float(diff @ np.linalg.solve(cov, diff))
    q = keep.size
    f = t2 * (nu - q + 1.0) / (nu * q)
    p = float(stats.f.sf(f, q, nu - q + 1.0))
    z = diff / np.sqrt(np.diag(cov))
    worst = int(np.argmax(np.abs(z)))
    detail = {
        "distances": [int(r) for r in keep],
        "largest_difference": {"r": int(keep[worst]), "z": float(z[worst])},
    }
    return TestOutcome(t2, p, float(q), (ka, kb), detail)


def holm(p_values: list[float]) -> list[float]:
    """Holm's step-down adjusted p-values (Holm 1979, common practice): sort ascending,
    p_adj(i) = max over j <= i of min(1, (m - j + 1) p_(j)); reject where p_adj < level.
    The family-wise error rate stays at most the level under any dependence.

    >>> holm([0.01, 0.04, 0.03])
    [0.03, 0.06, 0.06]
    """
    m = len(p_values)
    order = sorted(range(m), key=lambda i: p_values[i])
    out = [0.0] * m
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * p_values[i]))
        out[i] = running
    return [round(v, 15) for v in out]
