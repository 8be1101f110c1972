"""What a declared model implies: hop rates, stationary weights, exact finite-size laws.

This module holds the physics that several layers need (the exact sampler in
``massarc.simulate``, the ``stationary-law`` and ``steady-state`` checks), so it lives on
the ground floor next to the metadata models.

Facts used (see the tests for the checks against outside sources):

* ZRP on a ring (or a symmetric chain with walls) has a product stationary measure with
  single-site weight f(m) = prod_{k=1..m} 1/u(k); at fixed total mass M on N sites the law
  is canonical, P(m_1 = m) = f(m) Z(N-1, M-m) / Z(N, M) with
  Z(N, M) = sum_m f(m) Z(N-1, M-m) (Evans and Hanney, J. Phys. A 38, R195, 2005).
* For u(k) = 1 + b/k and b > 2 a condensate forms above rho_c = 1/(b-2) (same reference).
* CMAM condenses above rho_c = sqrt(w/D + 1) - 1 (Majumdar, Krishnamurthy and Barma,
  PRL 81, 3691, 1998; Rajesh and Majumdar for the exactness in every dimension).
* The largest mass of the canonical ZRP steady state has the law
  P(max <= K) = Z_K(N, M) / Z(N, M), Z_K the partition function of the weights f truncated
  at K (f(m) = 0 for m > K): by the definition of the canonical measure, Z_K sums the
  weights of exactly the configurations whose every mass is at most K. (The largest mass
  of factorised steady states is studied by Evans, Majumdar and Zia, J. Stat. Phys. 123,
  357, 2006, from memory.) Checked against enumeration and exact samples in the tests.
* A condensed steady state holds a condensate of about (rho - rho_c) N units, the excess
  over the critical fluid (same references as rho_c above).
* Relaxation from a random start takes t ~ L^z, z = 3 for symmetric ZRP, 2 for
  asymmetric ZRP and for CMAM (coarsening l(t) ~ t^(1/z); Godreche, J. Phys. A 36, 6313,
  2003; Grosskinsky, Schuetz and Spohn, J. Stat. Phys. 113, 389, 2003).
"""

from __future__ import annotations

import math

import numpy as np

from .models import CMAMModel, RunMeta, ZRPModel

__all__ = [
    "canonical_site_law",
    "condensate_mass",
    "convolution_power",
    "critical_density",
    "dynamic_exponent",
    "hop_rates",
    "largest_mass_cdf",
    "largest_mass_quantile",
    "log_partition",
    "max_hop_rate",
    "relaxation_time",
    "site_weights",
    "tilt_to_density",
    "why_no_canonical_law",
]

# Above this many masses np.convolve (exact, O(M^2)) gives way to FFT convolution.
_DIRECT_CONVOLVE_MAX = 4096


def hop_rates(model: ZRPModel, kmax: int) -> np.ndarray:
    """u(0..kmax) as float64, with u(0) = 0.

    >>> hop_rates(ZRPModel(family="zrp", b=2.0), 3).tolist()
    [0.0, 3.0, 2.0, 1.6666666666666665]
    """
    k = np.arange(kmax + 1, dtype=np.float64)
    if model.b is not None:
        with np.errstate(divide="ignore"):
            u = 1.0 + model.b / k
    elif model.rate is not None:
        u = np.full(kmax + 1, model.rate)
    else:
        table = np.asarray(model.rates, dtype=np.float64)
        idx = np.minimum(np.arange(kmax + 1), len(table)) - 1
        u = table[np.maximum(idx, 0)]
    u[0] = 0.0
    return u


def max_hop_rate(model: ZRPModel) -> float:
    """sup_k u(k): the rate bound used by the rejection (thinning) sampler."""
    if model.b is not None:
        return 1.0 + max(model.b, 0.0)
    if model.rate is not None:
        return float(model.rate)
    return float(max(model.rates or [1.0]))


def site_weights(model: ZRPModel, mmax: int) -> np.ndarray:
    """Single-site stationary weights f(0..mmax), normalised to sum to 1.

    f(m) = prod_{k<=m} 1/u(k), computed in log space. Normalising by the sum keeps the
    partition functions probabilities (they never overflow); the canonical law does not
    depend on the normalisation.
    """
    u = hop_rates(model, mmax)
    logf = -np.concatenate([[0.0], np.cumsum(np.log(u[1:]))])
    w = np.exp(logf - logf.max())
    return w / w.sum()


def tilt_to_density(p: np.ndarray, density: float) -> np.ndarray:
    """Multiply p(m) by z^m (then normalise) so that the mean equals ``density``.

    The canonical law is unchanged by such a tilt, but the convolution powers then peak
    near the total mass instead of underflowing far in their tails.
    """
    m = np.arange(len(p), dtype=np.float64)
    with np.errstate(divide="ignore"):
        logp = np.log(p)

    def tilted(logz: float) -> np.ndarray:
        a = logp + logz * m
        a = np.exp(a - a.max())
        return a / a.sum()

    target = min(max(density, 0.0), len(p) - 1.0)
    lo, hi = -60.0, 60.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if float(tilted(mid) @ m) < target:
            lo = mid
        else:
            hi = mid
        if hi - lo < 1e-12:
            break
    return tilted(0.5 * (lo + hi))


def _convolve(a: np.ndarray, b: np.ndarray, n: int) -> np.ndarray:
    if n <= _DIRECT_CONVOLVE_MAX:
        out = np.convolve(a, b)[:n]
    else:
        from scipy.signal import fftconvolve  # imported here: it costs ~0.8 s at start-up

        out = np.clip(fftconvolve(a, b)[:n], 0.0, None)
    top = out.max()
    return out / top if top > 0 else out


def convolution_power(p: np.ndarray, n: int, mmax: int) -> np.ndarray:
    """p^{*n}(0..mmax) up to a constant factor, by binary powering (O(M^2 log n)).

    This is Z(n, M') for M' = 0..mmax when p holds single-site weights.
    """
    size = mmax + 1
    result = np.zeros(size)
    result[0] = 1.0
    base = np.asarray(p[:size], dtype=np.float64)
    while n > 0:
        if n & 1:
            result = _convolve(result, base, size)
        n >>= 1
        if n:
            base = _convolve(base, base, size)
    return result


def canonical_site_law(model: ZRPModel, volume: int, mass: int) -> np.ndarray:
    """Exact single-site law P(m), m = 0..mass, of the canonical ZRP steady state.

    P(m) = f(m) Z(volume-1, mass-m) / Z(volume, mass): the product measure conditioned on
    the total mass, for a ring (any drift) or a symmetric chain with walls.

    >>> law = canonical_site_law(ZRPModel(family="zrp", rate=1.0), volume=2, mass=2)
    >>> np.round(law, 6).tolist()   # f = 1: (0,2), (1,1), (2,0) equally likely
    [0.333333, 0.333333, 0.333333]
    """
    if volume < 1 or mass < 0:
        raise ValueError(f"expected volume >= 1 and mass >= 0, got volume={volume}, mass={mass}")
    p = tilt_to_density(site_weights(model, mass), mass / volume)
    if volume == 1:
        law = np.zeros(mass + 1)
        law[mass] = 1.0
        return law
    rest = convolution_power(p, volume - 1, mass)
    law = p * rest[::-1]
    return law / law.sum()


def why_no_canonical_law(meta: RunMeta) -> str | None:
    """Why :func:`canonical_site_law` is not the steady state of the declared model and
    lattice (None: it is, for a ZRP on a ring or torus with any drift, or with symmetric
    moves between walls).

    >>> from massarc.schema import parse_metadata
    >>> why_no_canonical_law(parse_metadata({"model": {"family": "zrp", "b": 4.0},
    ...     "lattice": {"sites": [8], "boundary": "open"}, "run": {"regime": "stationary"}}))
    'open boundaries: the canonical law does not hold'
    """
    if not isinstance(meta.model, ZRPModel):
        return f"no exact stationary law is known for family {meta.model.family}"
    bounds = meta.lattice.boundary
    if "open" in bounds:
        return "open boundaries: the canonical law does not hold"
    if meta.model.drift == "asymmetric" and "reflecting" in bounds:
        return "asymmetric moves between walls: the steady state is not homogeneous"
    return None


def critical_density(meta_model: ZRPModel | CMAMModel | object) -> float | None:
    """rho_c above which a condensate forms, or None when the model does not condense.

    >>> critical_density(ZRPModel(family="zrp", b=4.0))
    0.5
    >>> round(critical_density(CMAMModel(family="cmam", diffusion=1.0, chipping=3.0)), 6)
    1.0
    """
    if isinstance(meta_model, ZRPModel):
        if meta_model.b is not None and meta_model.b > 2:
            return 1.0 / (meta_model.b - 2.0)
        return None
    if isinstance(meta_model, CMAMModel):
        return math.sqrt(meta_model.chipping / meta_model.diffusion + 1.0) - 1.0
    return None


def dynamic_exponent(meta_model: ZRPModel | CMAMModel | object) -> float | None:
    """z in l(t) ~ t^(1/z): 3 for symmetric ZRP, 2 for asymmetric ZRP and for CMAM."""
    if isinstance(meta_model, ZRPModel):
        return 3.0 if meta_model.drift == "symmetric" else 2.0
    if isinstance(meta_model, CMAMModel):
        return 2.0
    return None


def relaxation_time(meta: RunMeta) -> float | None:
    """About L^z / (rate scale): the time a random start needs to reach the steady state.

    L is the largest linear extent of the lattice; the rate scale is u(infinity) for the ZRP
    and D for the CMAM. Returns None for custom models.
    """
    z = dynamic_exponent(meta.model)
    if z is None:
        return None
    length = max(meta.lattice.sites)
    model = meta.model
    if isinstance(model, ZRPModel):
        if model.b is not None:
            scale = 1.0
        elif model.rate is not None:
            scale = model.rate
        else:
            scale = (model.rates or [1.0])[-1]
    else:
        assert isinstance(model, CMAMModel)
        scale = model.diffusion
    return float(length) ** z / scale


def condensate_mass(meta_model: ZRPModel | CMAMModel | object, volume: int, mass: float) -> float:
    """(rho - rho_c) N: the mass a condensed steady state holds in its condensate (0 when
    rho <= rho_c or the model does not condense).

    >>> condensate_mass(CMAMModel(family="cmam", diffusion=1.0, chipping=3.0), 100, 300)
    200.0
    """
    rho_c = critical_density(meta_model)
    if rho_c is None or volume < 1:
        return 0.0
    return max(0.0, mass - rho_c * volume)


def _log_weights(model: ZRPModel, kmax: int) -> np.ndarray:
    """log f(0..kmax), f(m) = prod_{k<=m} 1/u(k) (f(0) = 1), not normalised."""
    u = hop_rates(model, kmax)
    return -np.concatenate([[0.0], np.cumsum(np.log(u[1:]))])


def _tilt(logf: np.ndarray, density: float) -> float:
    """theta such that the law proportional to f(m) e^(theta m), m = 0..K, has mean ``density``
    (0 < density < K).

    The mean grows with theta at the rate of the variance, so Newton's steps on it
    converge fast; a step that would leave the bracket known to hold the root is replaced
    by bisection. Written out rather than calling ``scipy.optimize.brentq`` because
    importing scipy.optimize costs about a tenth of a second of every audit of a ZRP run
    (the tests compare the two)."""
    m = np.arange(len(logf), dtype=np.float64)

    def excess(theta: float) -> tuple[float, float]:
        a = logf + theta * m
        w = np.exp(a - a.max())
        w /= w.sum()
        mean = float(w @ m)
        return mean - density, float(w @ (m - mean) ** 2)

    lo, hi = -1.0, 1.0
    while excess(lo)[0] > 0:
        lo *= 2.0
    while excess(hi)[0] < 0:
        hi *= 2.0
    theta = min(max(0.0, lo), hi)
    for _ in range(200):
        f, var = excess(theta)
        if f == 0.0:
            break
        if f > 0:
            hi = theta
        else:
            lo = theta
        step = theta - f / var if var > 0 else math.nan
        new = step if lo < step < hi else 0.5 * (lo + hi)
        done = abs(new - theta) <= 1e-14 * (1.0 + abs(theta))
        theta = new
        if done:
            break
    return float(theta)


def _scaled_convolve(a: np.ndarray, b: np.ndarray, n: int) -> tuple[np.ndarray, float]:
    """(a * b)[:n] divided by its maximum, and the log of that maximum."""
    if max(len(a), len(b)) <= _DIRECT_CONVOLVE_MAX:
        out = np.convolve(a, b)[:n]
    else:
        from scipy.signal import fftconvolve

        out = np.clip(fftconvolve(a, b)[:n], 0.0, None)
    top = float(out.max())
    return out / top, math.log(top)


def log_partition(model: ZRPModel, volume: int, mass: int, cap: int | None = None) -> float:
    """log Z(N, M) = log sum over configurations of N sites holding M units of prod_i f(m_i),
    with f(m) = prod_{k<=m} 1/u(k); with ``cap``, only configurations whose every mass is at
    most ``cap`` count (f truncated at ``cap``). Returns -inf when there are none.

    The weights are tilted to the density M/N first (f(m) e^(theta m) / c, a law of mean
    M/N), so that the N-fold convolution peaks at M; then
    log Z = log(tilted power at M) - theta M + N log c. Binary powering keeps a log scale
    beside each partial product, so nothing under- or overflows.

    >>> round(math.exp(log_partition(ZRPModel(family="zrp", rate=1.0), 2, 2)), 12)
    3.0
    """
    if volume < 1 or mass < 0:
        raise ValueError(f"expected volume >= 1 and mass >= 0, got volume={volume}, mass={mass}")
    top = mass if cap is None else min(int(cap), mass)
    if top < 0 or volume * top < mass:
        return -math.inf
    logf = _log_weights(model, top)
    if mass == 0:
        return volume * float(logf[0])
    if volume * top == mass:  # every site holds exactly `top`
        return volume * float(logf[top])
    theta = _tilt(logf, mass / volume)
    from scipy.special import logsumexp

    a = logf + theta * np.arange(top + 1)
    log_c = float(logsumexp(a))
    size = mass + 1
    base = np.zeros(size)
    base[: top + 1] = np.exp(a - log_c)
    log_base = 0.0
    result = np.zeros(size)
    result[0] = 1.0
    log_result = 0.0
    n = volume
    while n > 0:
        if n & 1:
            result, s = _scaled_convolve(result, base, size)
            log_result += log_base + s
        n >>= 1
        if n:
            base, s = _scaled_convolve(base, base, size)
            log_base = 2.0 * log_base + s
    if result[mass] <= 0.0:
        return -math.inf
    return math.log(result[mass]) + log_result - theta * mass + volume * log_c


def largest_mass_cdf(
    model: ZRPModel, volume: int, mass: int, k: int, log_z: float | None = None
) -> float:
    """P(max_i m_i <= k) in the canonical ZRP steady state of N sites holding M units:
    Z_k(N, M) / Z(N, M), Z_k with the weights truncated at k. ``log_z`` may pass
    :func:`log_partition` of (N, M) when it is already known.

    >>> round(largest_mass_cdf(ZRPModel(family="zrp", rate=1.0), 2, 2, 1), 12)  # (1,1) of 3
    0.333333333333
    """
    if k >= mass:
        return 1.0
    log_k = log_partition(model, volume, mass, cap=k)
    if log_k == -math.inf:
        return 0.0
    if log_z is None:
        log_z = log_partition(model, volume, mass)
    return min(1.0, math.exp(log_k - log_z))


def largest_mass_quantile(model: ZRPModel, volume: int, mass: int, q: float) -> int:
    """The smallest K with P(max <= K) >= q (bisection on :func:`largest_mass_cdf`)."""
    log_z = log_partition(model, volume, mass)
    lo, hi = max(0, -(-mass // max(volume, 1)) - 1), mass  # P(max <= lo) = 0 unless lo = M
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if largest_mass_cdf(model, volume, mass, mid, log_z) >= q:
            hi = mid
        else:
            lo = mid
    return hi if largest_mass_cdf(model, volume, mass, lo, log_z) < q else lo
