"""Extreme-value laws of the largest mass, fitted by maximum likelihood through scipy.stats.

Sample. The largest mass of every replica at every ``stride``-th snapshot of the window
(``stride`` about the autocorrelation time, so that draws are nearly independent), thinned
further to at most ``cap`` draws. The fits are made on the standardised variable
z = (x - mean) / sd, where the optimisers behave; the parameters are also given in mass
units (location and scale times sd, plus mean; shapes unchanged), conditional on the
sample's mean and sd.

Laws (scipy.stats conventions): Gumbel ``gumbel_r(loc, scale)``; Frechet
``invweibull(c, loc, scale)`` (shape xi = 1/c > 0); Weibull for maxima
``weibull_max(c, loc, scale)`` (bounded above at loc, xi = -1/c); generalised extreme
value ``genextreme(c, loc, scale)`` whose shape is c = -xi (the opposite sign of most
texts; ``genextreme(c=0)`` is ``gumbel_r``). The Frechet and Weibull laws are the GEV
with the sign of xi fixed, so their maximum-likelihood fits are the GEV fit rewritten
(:func:`from_gev`) when its xi has their sign; otherwise their likelihood is largest at
the Gumbel limit, and they are reported as adding nothing to the Gumbel fit.

Standard errors: the observed information, the inverse of the Hessian of the negative
log-likelihood at the maximum (``scipy.differentiate.hessian``); None where the Hessian is
not positive definite.

Goodness of fit. Null hypothesis: the sample is drawn from the fitted family (parameters
unknown). Statistic: Kolmogorov-Smirnov distance D between the sample and the law. The
p-value must account for the estimated parameters; two ways:

* ``half-sample`` (default, cheap): the parameters are refitted on a random half of the
  sample and the whole sample is tested against that law with the Kolmogorov
  distribution (``scipy.stats.kstest``); asymptotically exact (Durbin's half-sample
  method; from memory, D'Agostino and Stephens, Goodness-of-Fit Techniques, 1986, ch. 4).
  ``ks`` is D against the whole-sample fit;
* ``bootstrap``: a parametric bootstrap with a refit on every draw
  (``scipy.stats.goodness_of_fit``), exact up to Monte Carlo error but slow.

>>> import numpy as np
>>> from scipy import stats
>>> x = stats.gumbel_r.rvs(loc=100.0, scale=5.0, size=2000, random_state=2)
>>> fits = fit_extremes(x)
>>> g = fits["laws"]["gumbel"]
>>> [round(v) for v in g["params_mass"]]            # loc and scale in mass units
[100, 5]
>>> round(g["mean"]), round(g["var"] ** 0.5)        # 100 + 0.5772 x 5, pi 5 / sqrt 6
(103, 6)
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
from scipy import stats

__all__ = ["LAWS", "extreme_sample", "fit_extremes", "fit_law", "from_gev"]

#: Our law names -> scipy.stats distributions.
LAWS: dict[str, Any] = {
    "gumbel": stats.gumbel_r,
    "frechet": stats.invweibull,
    "weibull": stats.weibull_max,
    "gev": stats.genextreme,
}


def extreme_sample(
    largest: np.ndarray, valid: np.ndarray, start: int, stride: int, cap: int
) -> tuple[np.ndarray, int]:
    """The largest masses of the window ``start:`` every ``stride`` snapshots, over the
    replicas with every snapshot readable, thinned to at most ``cap`` draws; and the
    stride used.

    >>> extreme_sample(np.arange(20).reshape(2, 10), np.ones((2, 10), bool), 4, 2, 4)
    (array([ 4.,  7., 14., 17.]), 3)
    """
    rows = largest[np.asarray(valid).all(axis=1)]
    stride = max(1, int(stride))
    n_win = max(rows.shape[1] - start, 0)
    while rows.shape[0] * math.ceil(n_win / stride) > cap:
        stride += 1
    return rows[:, start::stride].astype(np.float64).reshape(-1), stride


#: |xi| below which a GEV fit counts as the Gumbel law (its Frechet or Weibull form would
#: need a shape c = 1/|xi| beyond any useful precision).
_XI_MIN = 1e-6


def _nll(dist: Any, z: np.ndarray, params: Sequence[float]) -> float:
    with np.errstate(all="ignore"):
        value = -np.sum(dist.logpdf(z, *params))
    return float(value) if np.isfinite(value) else math.inf


def from_gev(name: str, gev: Sequence[float]) -> tuple[float, ...] | None:
    """The Frechet or Weibull parameters of a GEV law ``(c, loc, scale)``, when its shape
    xi = -c has the law's sign (None otherwise: that law's best fit is its Gumbel limit).

    >>> from_gev("frechet", (-0.25, 0.0, 1.0))     # xi = 1/4: invweibull(4, -4, 4)
    (4.0, -4.0, 4.0)
    """
    c, mu, sigma = gev
    xi = -c
    if name == "frechet" and xi > _XI_MIN:
        return (1.0 / xi, mu - sigma / xi, sigma / xi)
    if name == "weibull" and xi < -_XI_MIN:
        return (-1.0 / xi, mu - sigma / xi, -sigma / xi)
    return None


def fit_law(
    name: str, z: np.ndarray, start: Sequence[float] | None = None
) -> tuple[tuple[float, ...], float]:
    """Maximum-likelihood parameters of law ``name`` on ``z`` and the negative
    log-likelihood; ``((), inf)`` when there is none.

    Gumbel: ``gumbel_r.fit``. GEV: ``genextreme.fit`` from ``start`` when given, else from
    the Gumbel fit (c = 0), and from c = 0.3 should that fail (the GEV likelihood has
    local maxima: scipy's own starting guess lands in one for half of Gumbel and most
    Frechet samples; the Gumbel start did not in 30 trials over five laws). Frechet and
    Weibull: the GEV maximum ``start`` mapped by :func:`from_gev` when its shape has their
    sign; otherwise their maximum lies at the Gumbel limit and ``((), inf)`` is returned.
    """
    dist = LAWS[name]
    if name in ("frechet", "weibull"):
        params = None if start is None else from_gev(name, start)
        return ((), math.inf) if params is None else (params, _nll(dist, z, params))
    tries: list[tuple[float, ...]] = []
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        if name == "gumbel":
            tries.append(tuple(float(v) for v in dist.fit(z)))
        else:
            if start is not None:
                starts = [tuple(start)]
            else:  # from the Gumbel fit (c = 0); from c = 0.3 (xi = -0.3) if that fails
                loc, scale = stats.gumbel_r.fit(z)
                starts = [(0.0, float(loc), float(scale)), (0.3, 0.0, 1.0)]
            for c, loc, scale in starts:
                if tries and math.isfinite(_nll(dist, z, tries[-1])):
                    break
                tries.append(tuple(float(v) for v in dist.fit(z, c, loc=loc, scale=scale)))
    best: tuple[tuple[float, ...], float] = ((), math.inf)
    for params in tries:
        value = _nll(dist, z, params)
        if value < best[1]:
            best = (params, value)
    return best


def _stderr(dist: Any, z: np.ndarray, params: tuple[float, ...]) -> list[float | None]:
    """Observed-information standard errors (None where the Hessian is not usable).

    The Hessian is taken in parameters scaled by max(|theta|, 0.1), by central
    differences refined twice (``scipy.differentiate.hessian``)."""
    from scipy.differentiate import hessian

    theta = np.asarray(params, dtype=np.float64)
    scale = np.maximum(np.abs(theta), 0.1)

    def nll(u: np.ndarray) -> np.ndarray:
        cols = [(q * s).reshape(1, -1) for q, s in zip(u, scale, strict=True)]
        with np.errstate(all="ignore"):
            ll = dist.logpdf(z[:, None], *cols).sum(axis=0)
        return -ll.reshape(u.shape[1:])

    try:
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            h = hessian(nll, theta / scale, initial_step=1e-2, order=2, maxiter=2).ddf
        h = h / np.outer(scale, scale)
        h = (h + h.T) / 2
        if not (np.all(np.isfinite(h)) and np.all(np.linalg.eigvalsh(h) > 0)):
            return [None] * len(params)
        diag = np.diag(np.linalg.inv(h))
    except (ValueError, np.linalg.LinAlgError):
        return [None] * len(params)
    return [float(math.sqrt(v)) if v > 0 else None for v in diag]


def _ks_p(
    z: np.ndarray, fits: dict[str, tuple[float, ...]], how: str, draws: int, seed: int
) -> dict[str, tuple[float, float]]:
    """(KS distance to the fitted law, p-value accounting for the estimated parameters)
    for every fitted law (``fits``: law -> parameters on ``z``)."""
    out: dict[str, tuple[float, float]] = {}
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        if how == "bootstrap":
            for name, params in fits.items():
                dist = LAWS[name]
                names = [*(dist.shapes.split(", ") if dist.shapes else []), "loc", "scale"]
                res = stats.goodness_of_fit(
                    dist, z, statistic="ks", n_mc_samples=draws, rng=np.random.default_rng(seed),
                    guessed_params=dict(zip(names, params, strict=True)),
                )  # fmt: skip
                out[name] = (float(res.statistic), float(res.pvalue))
            return out
        half = z[np.random.default_rng(seed).permutation(len(z))[: len(z) // 2]]
        gumbel = fit_law("gumbel", half)[0]
        gev = fit_law("gev", half, fits.get("gev"))[0] or (0.0, *gumbel)
        for name, params in fits.items():
            dist = LAWS[name]
            if name == "gumbel":
                law = dist(*gumbel)
            elif name == "gev":
                law = dist(*gev)
            else:  # Frechet or Weibull on the half: the GEV mapped, or its Gumbel limit
                mapped = from_gev(name, gev)
                law = dist(*mapped) if mapped is not None else stats.gumbel_r(*gumbel)
            d_full = float(stats.kstest(z, dist(*params).cdf).statistic)
            out[name] = (d_full, float(stats.kstest(z, law.cdf).pvalue))
    return out


def fit_extremes(
    sample: np.ndarray, *, gof: str = "half-sample", draws: int = 199, seed: int = 0
) -> dict[str, Any]:
    """Fit every law of :data:`LAWS` to ``sample`` (mass units); a plain dict.

    ``laws[name]`` holds ``params`` and ``stderr`` on the standardised variable,
    ``params_mass`` and ``stderr_mass`` in mass units, ``loglik``, ``aic``, ``ks``,
    ``p_value``, and the fitted law's ``mean`` and ``var`` in mass units (None where
    infinite); ``xi`` (the usual shape sign) for the three-parameter laws; or only a
    ``note`` saying why there is no fit. ``best`` is the law of lowest AIC.
    """
    x = np.asarray(sample, dtype=np.float64)
    out: dict[str, Any] = {"draws": int(x.size), "gof_method": gof, "laws": {}, "best": None}
    sd = float(x.std(ddof=1)) if x.size > 1 else 0.0
    if x.size < 20 or not sd > 0:
        out["note"] = f"no fit: {x.size} draws, sd {sd:g} (need >= 20 draws, not all equal)"
        return out
    mean = float(x.mean())
    out.update(mean=mean, sd=sd)
    z = (x - mean) / sd
    found = {"gumbel": fit_law("gumbel", z), "gev": fit_law("gev", z)}
    gev_params = found["gev"][0] or None
    for name in ("frechet", "weibull"):
        found[name] = fit_law(name, z, gev_params)
    fits = {name: params for name, (params, _) in found.items() if params}
    ks_p = _ks_p(z, fits, gof, draws, seed)
    for name, dist in LAWS.items():
        params, nll = found[name]
        if not params:
            out["laws"][name] = {"note": (
                "the likelihood is largest at the Gumbel limit (the GEV shape has the other "
                "sign): this law adds nothing to the Gumbel fit" if gev_params is not None
                else "the optimiser failed")}  # fmt: skip
            continue
        se = _stderr(dist, z, params)
        k = len(params)
        in_mass = (*params[: k - 2], mean + sd * params[-2], sd * params[-1])
        se_mass = [*se[: k - 2], *(None if s is None else sd * s for s in se[k - 2 :])]
        law = dist(*in_mass)
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            moments = [float(law.mean()), float(law.var())]
        ks, p = ks_p[name]
        entry = {
            "params": list(params), "stderr": se, "params_mass": list(in_mass),
            "stderr_mass": se_mass, "loglik": -nll, "aic": 2 * k + 2 * nll, "ks": ks,
            "p_value": p, "mean": moments[0], "var": moments[1],
        }  # fmt: skip
        if name == "gev":
            entry["xi"] = -params[0]
        elif name in ("frechet", "weibull"):
            entry["xi"] = (1.0 if name == "frechet" else -1.0) / params[0]
        out["laws"][name] = entry
    fitted = {n: e["aic"] for n, e in out["laws"].items() if "aic" in e}
    out["best"] = min(fitted, key=fitted.__getitem__) if fitted else None
    return out
