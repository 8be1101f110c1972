"""Autocorrelation by FFT and integrated autocorrelation times with Sokal's window.

Conventions (they differ between fields; every name here says which one it means)
---------------------------------------------------------------------------------
rho(t)
    Normalised autocorrelation at lag t, estimated from the biased autocovariance
    C(t) = (1/n) sum_{s<n-t} (x_s - xbar)(x_{s+t} - xbar), rho(t) = C(t) / C(0).
tau_int (Sokal)
    tau_int(M) = 1/2 + sum_{t=1}^{M} rho(t). For independent draws tau_int = 1/2.
statistical inefficiency g
    g = 1 + 2 sum_{t>=1} rho(t) = 2 tau_int: the factor by which correlation inflates the
    variance of the mean, var(xbar) = g var(x) / n, so n / g is the effective number of
    independent samples. emcee's ``integrated_time`` returns g; pymbar calls it g.

Sokal's automatic window: M is the smallest lag with M >= c tau_int(M) (c = 5 by
default; N. Madras and A. D. Sokal, J. Stat. Phys. 50, 109, 1988, appendix C, from
memory). emcee applies the same rule to g, so its ``c`` is half of
ours: ``integrated_autocorr_time(x, c=5)`` equals ``emcee.autocorr.integrated_time(x, c=2.5)``
divided by 2.

>>> import numpy as np
>>> x = np.random.default_rng(1).standard_normal(4000)
>>> round(statistical_inefficiency(x), 1)  # independent draws: g close to 1
1.0
"""

from __future__ import annotations

import functools
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

__all__ = [
    "AutocorrTime",
    "autocorrelation",
    "autocovariance",
    "chains_autocorr_time",
    "integrated_autocorr_time",
    "sokal_window",
    "statistical_inefficiency",
]

#: Sokal's window constant: M >= c * tau_int(M).
SOKAL_C = 5.0


#: Padded values transformed at once by :func:`autocovariance` (2 MiB of float64).
_BLOCK_VALUES = 1 << 18


@functools.lru_cache(maxsize=256)  # the stationary window asks for a few lengths many times
def _fft_length(n: int) -> int:
    """The least length >= 2n whose prime factors are 2, 3 and 5 (zero padding to 2n avoids
    circular wrap; such lengths transform fast, and a power of two could double the work).

    >>> [_fft_length(n) for n in (1, 5, 33, 67109)]
    [2, 10, 72, 135000]
    """
    need = 2 * n
    best = 1 << (need - 1).bit_length()  # the power of two: an upper bound
    p5 = 1
    while p5 < best:
        p35 = p5
        while p35 < best:
            m = p35
            while m < need:
                m *= 2
            best = min(best, m)
            p35 *= 3
        p5 *= 5
    return best


def autocovariance(x: np.ndarray, axis: int = -1) -> np.ndarray:
    """Biased autocovariance C(t), t = 0..n-1, along ``axis``, by FFT.

    C(t) = (1/n) sum_{s=0}^{n-t-1} (x_s - xbar)(x_{s+t} - xbar); the 1/n normalisation
    keeps the estimated sequence positive definite.
    """
    a = np.asarray(x, dtype=np.float64)
    if a.ndim == 1 and a.size:  # one series (the diagnostics ask for thousands): no reshaping
        n = a.size
        m = _fft_length(n)
        f = np.fft.rfft(a - a.mean(), n=m)
        return np.fft.irfft(f * np.conj(f), n=m)[:n] / n
    a = np.moveaxis(a, axis, -1)
    n = a.shape[-1]
    if n == 0:
        raise ValueError("expected a series with at least one value; got an empty one")
    m = _fft_length(n)
    rows = a.reshape(-1, n)
    acov = np.empty(rows.shape, np.float64)
    # a block of series at a time: the transforms need about 40 bytes per padded value, so
    # long runs' (replica, snapshot) arrays are transformed a few series at a time
    step = max(1, _BLOCK_VALUES // m)
    for lo in range(0, len(rows), step):
        d = rows[lo : lo + step] - rows[lo : lo + step].mean(axis=-1, keepdims=True)
        f = np.fft.rfft(d, n=m, axis=-1)
        acov[lo : lo + step] = np.fft.irfft(f * np.conj(f), n=m, axis=-1)[..., :n] / n
    return np.moveaxis(acov.reshape(a.shape), -1, axis)


def autocorrelation(x: np.ndarray, axis: int = -1) -> np.ndarray:
    """Normalised autocorrelation rho(t) = C(t) / C(0) along ``axis`` (NaN if constant).

    >>> autocorrelation(np.array([1.0, -1.0, 1.0, -1.0]))[:2].tolist()
    [1.0, -0.75]
    """
    acov = autocovariance(x, axis=axis)  # a fresh array: normalised in place
    c0 = np.take(acov, [0], axis=axis)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.divide(acov, c0, out=acov)


def sokal_window(tau_partial: np.ndarray, c: float = SOKAL_C) -> int:
    """Smallest M with M >= c * tau_partial[M]; the last lag when there is none.

    ``tau_partial[M]`` is tau_int(M) = 1/2 + sum_{t=1}^{M} rho(t).
    """
    lags = np.arange(len(tau_partial))
    ok = lags >= c * tau_partial
    return int(np.argmax(ok)) if ok.any() else len(tau_partial) - 1


@dataclass(frozen=True)
class AutocorrTime:
    """Integrated autocorrelation time of a series with Sokal's window.

    Attributes
    ----------
    tau_int
        Sokal's tau_int = 1/2 + sum_{t=1}^{M} rho(t) (NaN for a constant series).
    window
        The lag M where the sum was cut.
    n
        Number of draws per series.
    chains
        Number of series whose autocorrelations were averaged.
    converged
        True when the window condition M >= c tau_int(M) was met inside the series and the
        series holds at least 50 g draws per chain (common practice: emcee's default ``tol``;
        below that the estimate is unreliable and biased low).
    """

    tau_int: float
    window: int
    n: int
    chains: int
    converged: bool

    @property
    def g(self) -> float:
        """Statistical inefficiency g = 2 tau_int = 1 + 2 sum rho."""
        return 2.0 * self.tau_int

    @property
    def ess(self) -> float:
        """chains * n / g: the effective number of independent draws."""
        return self.chains * self.n / self.g


def integrated_autocorr_time(x: np.ndarray, c: float = SOKAL_C) -> AutocorrTime:
    """Sokal's tau_int of a series ``(draw,)`` or of chains ``(chain, draw)``.

    For several chains the normalised autocorrelations are averaged over chains before the
    window is chosen (as emcee does for walkers); each chain is centred on its own mean.

    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x = np.zeros(20000)
    >>> for i in range(1, len(x)):  # AR(1), phi = 0.5: g = (1 + phi) / (1 - phi) = 3
    ...     x[i] = 0.5 * x[i - 1] + rng.standard_normal()
    >>> bool(abs(integrated_autocorr_time(x).g - 3.0) < 0.2)
    True
    """
    a = np.atleast_2d(np.asarray(x, dtype=np.float64))
    if a.ndim != 2:
        raise ValueError(f"expected a series (draw,) or chains (chain, draw); got shape {a.shape}")
    chains, n = a.shape
    if n < 2 or not np.all(np.isfinite(a)):
        return AutocorrTime(float("nan"), 0, n, chains, False)
    rho = autocorrelation(a, axis=-1)
    if not np.all(np.isfinite(rho[:, 0])):  # a constant chain: no autocorrelation to measure
        return AutocorrTime(float("nan"), 0, n, chains, False)
    return _sokal(rho.mean(axis=0), n, chains, c)


def chains_autocorr_time(chains: Iterable[np.ndarray], c: float = SOKAL_C) -> AutocorrTime:
    """:func:`integrated_autocorr_time` of chains handed over one at a time (1-D series of
    one length, made float64), holding the transforms of one chain rather than of all
    (long runs: a chain per replica, each of every snapshot). The numbers are the same
    to rounding: each chain is transformed alone, where the array form transforms short
    chains together (the FFT library's batched path may round differently)."""
    total: np.ndarray | None = None
    count, n, usable = 0, 0, True
    for chain in chains:
        a = np.asarray(chain, dtype=np.float64)
        if a.ndim != 1 or (count and a.size != n):
            raise ValueError(f"expected chains of {n or a.size} draws; got shape {a.shape}")
        count, n = count + 1, a.size
        if not usable:
            continue
        if n < 2 or not np.all(np.isfinite(a)):
            usable = False
            continue
        rho = autocorrelation(a)
        if not np.isfinite(rho[0]):  # a constant chain: no autocorrelation to measure
            usable = False
        elif total is None:
            total = rho
        else:
            total += rho  # chain by chain, as the mean over chains adds them
    if not usable or total is None:
        return AutocorrTime(float("nan"), 0, n, count, False)
    return _sokal(np.divide(total, count, out=total), n, count, c)


def _sokal(mean_rho: np.ndarray, n: int, chains: int, c: float) -> AutocorrTime:
    """Sokal's window on the chain-mean autocorrelation ``mean_rho``."""
    partial = np.cumsum(mean_rho) - 0.5  # tau_int(M) = 1/2 + sum_{t=1}^{M} rho(t)
    m = sokal_window(partial, c)
    tau = float(partial[m])
    met = bool(m >= c * tau)
    return AutocorrTime(tau, m, n, chains, met and n >= 50 * 2.0 * tau)


def statistical_inefficiency(x: np.ndarray, c: float = SOKAL_C) -> float:
    """g = 2 tau_int = 1 + 2 sum_{t=1}^{M} rho(t) with Sokal's window (NaN if constant)."""
    return integrated_autocorr_time(x, c).g
