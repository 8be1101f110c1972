"""Rank-normalised split R-hat and bulk/tail effective sample size.

A. Vehtari, A. Gelman, D. Simpson, B. Carpenter and P.-C. Buerkner, "Rank-normalization,
folding, and localization: an improved R-hat for assessing convergence of MCMC",
Bayesian Analysis 16, 667 (2021), doi:10.1214/20-BA1221. Input is ``(chain, draw)``;
here a chain is one replica of a run, a draw one snapshot.

Steps (section numbers of the paper):

* split: every chain is cut into its first and last halves (the middle draw of an odd
  chain is dropped), so that a trend within a chain shows as disagreement between chains;
* rank-normalise (4.1): pool all draws, take average ranks r, map them to normal scores
  Phi^{-1}((r - 3/8) / (S + 1/4)) (Blom's offsets), S the number of draws;
* R-hat (4.2): the classic potential scale reduction sqrt(var_plus / W) of the normal
  scores of the split chains, and of the folded draws |x - median|; the larger of the two;
* ESS (3.2): S / tau with tau = -1 + 2 sum_t rho_t, the combined autocorrelation
  rho_t = 1 - (W - mean_c C_c(t)) / var_plus, truncated by Geyer's initial positive and
  made monotone by Geyer's initial monotone sequence. Details follow the implementation the
  authors published with Stan (last even-lag term kept, tau >= 1 / log10(S));
* bulk ESS is the ESS of the rank-normalised split chains; tail ESS is the smaller ESS of
  the indicators I(x <= q) at the 5 % and 95 % quantiles (type 7 quantiles).

>>> import numpy as np
>>> x = np.random.default_rng(0).standard_normal((4, 500))
>>> bool(rhat_rank(x) < 1.01), bool(1500 < ess_bulk(x) < 2600)
(True, True)
"""

from __future__ import annotations

import numpy as np

from .autocorr import autocovariance

__all__ = [
    "ess_bulk",
    "ess_chains",
    "ess_tail",
    "rank_normalize",
    "rhat_basic",
    "rhat_rank",
    "split_chains",
]


def _chains(x: np.ndarray, min_draws: int = 4) -> np.ndarray:
    a = np.asarray(x, dtype=np.float64)
    if a.ndim == 1:
        a = a[np.newaxis, :]
    if a.ndim != 2:
        raise ValueError(f"expected draws shaped (chain, draw); got shape {a.shape}")
    if a.shape[1] < min_draws:
        raise ValueError(f"expected at least {min_draws} draws per chain; got {a.shape[1]}")
    if not np.all(np.isfinite(a)):
        raise ValueError("expected finite draws; got NaN or infinity")
    return a


def split_chains(x: np.ndarray) -> np.ndarray:
    """(chain, draw) -> (2 chain, draw // 2): first halves, then last halves."""
    a = np.asarray(x)
    half = a.shape[1] // 2
    return np.concatenate([a[:, :half], a[:, a.shape[1] - half :]], axis=0)


def rank_normalize(x: np.ndarray) -> np.ndarray:
    """Normal scores of the pooled average ranks, Phi^{-1}((r - 3/8) / (S + 1/4))."""
    a = np.asarray(x, dtype=np.float64)
    from ..tails import average_ranks, normal_ppf  # scipy.special, imported on first use

    r = average_ranks(a).reshape(a.shape)
    return normal_ppf((r - 0.375) / (a.size + 0.25))


def rhat_basic(x: np.ndarray) -> float:
    """Gelman-Rubin potential scale reduction of the given chains (no split, no ranks)."""
    a = np.asarray(x, dtype=np.float64)
    n = a.shape[1]
    within = float(np.mean(np.var(a, axis=1, ddof=1)))
    between = n * float(np.var(a.mean(axis=1), ddof=1))
    if within == 0.0:
        return float("nan")
    return float(np.sqrt((between / within + n - 1) / n))


def rhat_rank(x: np.ndarray) -> float:
    """Rank-normalised split R-hat: max of the bulk and folded-tail versions (NaN if constant).

    Needs at least 4 draws per chain; one chain is allowed (its halves are compared).
    """
    s = split_chains(_chains(x))
    if np.ptp(s) == 0.0:
        return float("nan")
    bulk = rhat_basic(rank_normalize(s))
    tail = rhat_basic(rank_normalize(np.abs(s - np.median(s))))
    return max(bulk, tail)


def ess_chains(x: np.ndarray) -> float:
    """ESS of chains as given (no split, no ranks), with Geyer's initial monotone sequence.

    A constant input has no measurable correlation; its ESS is the number of draws.
    """
    a = np.asarray(x, dtype=np.float64)
    chains, n = a.shape
    size = a.size
    if np.ptp(a) < np.finfo(float).resolution:
        return float(size)
    acov = autocovariance(a, axis=1)
    within = float(np.mean(acov[:, 0])) * n / (n - 1.0)
    var_plus = within * (n - 1.0) / n
    if chains > 1:
        var_plus += float(np.var(a.mean(axis=1), ddof=1))
    mean_acov = acov.mean(axis=0)
    rho = np.zeros(n)
    rho[0] = 1.0
    rho[1] = 1.0 - (within - mean_acov[1]) / var_plus
    even, odd = 1.0, rho[1]
    t = 1
    while t < n - 3 and even + odd > 0.0:  # Geyer's initial positive sequence
        even = 1.0 - (within - mean_acov[t + 1]) / var_plus
        odd = 1.0 - (within - mean_acov[t + 2]) / var_plus
        if even + odd >= 0.0:
            rho[t + 1], rho[t + 2] = even, odd
        t += 2
    last = t - 2
    if even > 0.0:
        rho[last + 1] = even
    t = 1
    while t <= last - 2:  # Geyer's initial monotone sequence
        if rho[t + 1] + rho[t + 2] > rho[t - 1] + rho[t]:
            rho[t + 1] = rho[t + 2] = 0.5 * (rho[t - 1] + rho[t])
        t += 2
    tau = -1.0 + 2.0 * float(np.sum(rho[: last + 1])) + float(np.sum(rho[last + 1 : last + 2]))
    tau = max(tau, 1.0 / np.log10(size))
    return float(size / tau)


def ess_bulk(x: np.ndarray) -> float:
    """Bulk ESS: ESS of the rank-normalised split chains (Vehtari et al. 2021)."""
    s = split_chains(_chains(x))
    if np.ptp(s) == 0.0:
        return float(s.size)
    return ess_chains(rank_normalize(s))


def ess_tail(x: np.ndarray, prob: tuple[float, float] = (0.05, 0.95)) -> float:
    """Tail ESS: the smaller ESS of I(x <= q_low) and I(x <= q_high) on split chains."""
    a = _chains(x)
    out = []
    for p in prob:
        q = np.quantile(a, p)  # type 7, as R and the reference implementation
        out.append(ess_chains(split_chains((a <= q).astype(np.float64))))
    return float(min(out))
