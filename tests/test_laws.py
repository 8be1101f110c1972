"""schema/laws.py against outside truth: direct enumeration, scipy.stats distributions and
the published critical densities and exponents."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from conftest import make_meta
from scipy import stats

from massarc.schema import CMAMModel, ZRPModel
from massarc.schema.laws import (
    canonical_site_law,
    convolution_power,
    critical_density,
    dynamic_exponent,
    hop_rates,
    max_hop_rate,
    relaxation_time,
    site_weights,
    tilt_to_density,
)

# Hop-rate laws, each with its u(k) written out here from the definition (not hop_rates).
LAWS = {
    "b=3": (ZRPModel(family="zrp", b=3.0), lambda k: 1.0 + 3.0 / k),
    "b=-0.5": (ZRPModel(family="zrp", b=-0.5), lambda k: 1.0 - 0.5 / k),
    "rate=2": (ZRPModel(family="zrp", rate=2.0), lambda k: 2.0),
    "table": (
        ZRPModel(family="zrp", rates=[1.0, 0.5, 2.0]),
        lambda k: [1.0, 0.5, 2.0][min(k, 3) - 1],
    ),
}


def _weight(u, m: int) -> float:
    """f(m) = prod_{k=1..m} 1/u(k) (Evans and Hanney, J. Phys. A 38, R195, 2005, eq. for the
    ZRP product measure)."""
    return math.prod(1.0 / u(k) for k in range(1, m + 1))


def _enumerated_site_law(u, sites: int, mass: int) -> np.ndarray:
    """P(m_1 = m) by direct enumeration of every configuration with the given total."""
    law = np.zeros(mass + 1)
    for config in itertools.product(range(mass + 1), repeat=sites):
        if sum(config) == mass:
            law[config[0]] += math.prod(_weight(u, m) for m in config)
    return law / law.sum()


@pytest.mark.parametrize("name", sorted(LAWS))
@pytest.mark.parametrize(("sites", "mass"), [(1, 3), (2, 0), (2, 4), (3, 5), (4, 6)])
def test_canonical_site_law_equals_direct_enumeration(name: str, sites: int, mass: int) -> None:
    model, u = LAWS[name]
    got = canonical_site_law(model, sites, mass)
    # direct enumeration of all configurations (itertools)
    np.testing.assert_allclose(got, _enumerated_site_law(u, sites, mass), rtol=1e-10, atol=1e-14)


@pytest.mark.parametrize("name", sorted(LAWS))
def test_hop_rates_follow_the_declared_law(name: str) -> None:
    model, u = LAWS[name]
    got = hop_rates(model, 8)
    assert got[0] == 0.0
    np.testing.assert_allclose(got[1:], [u(k) for k in range(1, 9)], rtol=1e-15)
    # the thinning bound is sup_k u(k) (from memory: uniformisation needs r_max >= u(k))
    assert max_hop_rate(model) >= got.max()
    assert max_hop_rate(model) == pytest.approx(max(u(k) for k in range(1, 10_000)), rel=1e-3)


@pytest.mark.parametrize("b", [1.5, 2.5, 3.0, 4.0, 7.5])
def test_site_weights_are_yule_simon(b: float) -> None:
    # Evans and Hanney, J. Phys. A 38, R195 (2005): for u(k) = 1 + b/k the critical
    # single-site law is p(m) = (b - 1) B(m + 1, b), i.e. scipy.stats.yulesimon(b - 1)
    # shifted to start at 0; renormalised on the truncated range 0..mmax.
    mmax = 300
    m = np.arange(mmax + 1)
    ref = stats.yulesimon(b - 1.0, loc=-1).pmf(m)
    np.testing.assert_allclose(
        site_weights(ZRPModel(family="zrp", b=b), mmax), ref / ref.sum(), rtol=1e-9
    )


@pytest.mark.parametrize("b", [2.5, 3.0, 4.0, 7.5])
def test_zrp_critical_density(b: float) -> None:
    model = ZRPModel(family="zrp", b=b)
    # rho_c = 1/(b - 2) (Evans and Hanney 2005), the mean of the critical law
    # scipy.stats.yulesimon(b - 1, loc=-1).mean()
    assert critical_density(model) == pytest.approx(1.0 / (b - 2.0), rel=1e-12)
    with np.errstate(all="ignore"):  # scipy also evaluates the (infinite) higher moments
        mean = stats.yulesimon(b - 1.0, loc=-1).mean()
    assert critical_density(model) == pytest.approx(mean, rel=1e-12)


def test_no_condensation_without_a_heavy_tail() -> None:
    # b <= 2: the critical law has no finite mean, no condensate (Evans and Hanney 2005)
    assert critical_density(ZRPModel(family="zrp", b=2.0)) is None
    assert critical_density(ZRPModel(family="zrp", b=1.0)) is None
    assert critical_density(ZRPModel(family="zrp", rate=1.0)) is None


@pytest.mark.parametrize(("d", "w"), [(1.0, 1.0), (1.0, 3.0), (2.0, 0.5), (0.25, 4.0)])
def test_cmam_critical_density(d: float, w: float) -> None:
    # Majumdar, Krishnamurthy and Barma, PRL 81, 3691 (1998): rho_c = sqrt(w/D + 1) - 1
    got = critical_density(CMAMModel(family="cmam", diffusion=d, chipping=w))
    assert got == pytest.approx(math.sqrt(w / d + 1.0) - 1.0, rel=1e-12)


@pytest.mark.parametrize("density", [0.05, 0.5, 1.5, 4.0])
def test_tilt_reaches_the_density_and_leaves_the_canonical_law_alone(density: float) -> None:
    model = ZRPModel(family="zrp", b=4.0)
    sites, mass = 12, 18
    p = site_weights(model, mass)
    tilted = tilt_to_density(p, density)
    m = np.arange(mass + 1)
    assert tilted @ m == pytest.approx(density, rel=1e-8)
    # the tilt multiplies p(m) by z^m: the ratio is geometric (definition of the tilt)
    ratio = tilted[1:] / tilted[:-1] / (p[1:] / p[:-1])
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-8)

    # canonical law from the tilted weights, by direct convolution (np.convolve)
    rest = np.array([1.0])
    for _ in range(sites - 1):
        rest = np.convolve(rest, tilted)[: mass + 1]
    law = tilted * rest[::-1]
    np.testing.assert_allclose(law / law.sum(), canonical_site_law(model, sites, mass), rtol=1e-9)
    # and with the untilted weights (the tilt must not matter)
    rest = np.array([1.0])
    for _ in range(sites - 1):
        rest = np.convolve(rest, p)[: mass + 1]
    plain = p * rest[::-1]
    np.testing.assert_allclose(law / law.sum(), plain / plain.sum(), rtol=1e-9)


@pytest.mark.parametrize(("n", "q", "mmax"), [(5, 0.8, 100), (40, 0.9, 6000), (300, 0.6, 5000)])
def test_convolution_power_is_negative_binomial(n: int, q: float, mmax: int) -> None:
    # The n-fold convolution of the geometric law (1 - q) q^m is the negative binomial
    # scipy.stats.nbinom(n, 1 - q); mmax = 100 uses the direct path, > 4096 the FFT path.
    m = np.arange(mmax + 1)
    p = stats.geom(1.0 - q, loc=-1).pmf(m)
    got = convolution_power(p, n, mmax)
    ref = stats.nbinom(n, 1.0 - q).pmf(m)
    np.testing.assert_allclose(got / got.max(), ref / ref.max(), rtol=1e-6, atol=1e-12)


def test_fft_and_direct_paths_agree() -> None:
    # the same power by both paths of laws._convolve: FFT above 4096 masses, direct below;
    # the reference is repeated np.convolve (exact up to round-off)
    model = ZRPModel(family="zrp", b=3.0)
    mmax = 5000
    p = tilt_to_density(site_weights(model, mmax), 25.0)
    fft = convolution_power(p, 200, mmax)
    direct = np.array([1.0])
    for _ in range(200):
        direct = np.convolve(direct, p[: mmax + 1])[: mmax + 1]
        direct /= direct.max()
    fft, direct = fft / fft.max(), direct / direct.max()
    big = direct > 1e-9
    np.testing.assert_allclose(fft[big], direct[big], rtol=1e-6)
    small = convolution_power(p[:4001], 200, 4000)
    np.testing.assert_allclose(
        small / small.max(), direct[:4001] / direct[:4001].max(), rtol=1e-9, atol=1e-14
    )


def test_dynamic_exponent_and_relaxation_time() -> None:
    # z = 3 symmetric ZRP, 2 asymmetric ZRP (Godreche, J. Phys. A 36, 6313, 2003;
    # Grosskinsky, Schuetz and Spohn, J. Stat. Phys. 113, 389, 2003) and z = 2 for the CMAM
    # (Majumdar, Krishnamurthy and Barma 1998: diffusive coarsening)
    sym = make_meta(sites=(50,), b=4.0)
    asym = make_meta(sites=(50,), b=4.0, drift="asymmetric")
    cmam = make_meta("cmam", sites=(20, 30), diffusion=2.0, chipping=1.0)
    assert dynamic_exponent(sym.model) == 3.0
    assert dynamic_exponent(asym.model) == 2.0
    assert dynamic_exponent(cmam.model) == 2.0
    assert relaxation_time(sym) == pytest.approx(50.0**3)
    assert relaxation_time(asym) == pytest.approx(50.0**2)
    assert relaxation_time(cmam) == pytest.approx(30.0**2 / 2.0)
    assert relaxation_time(make_meta("custom")) is None


@pytest.mark.parametrize("b", [0.5, 3.0, 4.0])
@pytest.mark.parametrize("density", [1e-3, 0.05, 0.4, 2.0, 9.5])
def test_tilt_matches_scipy_root_finding(b: float, density: float) -> None:
    """The tilt solves mean(theta) = density as scipy.optimize.brentq does (outside truth:
    scipy's root finder on the same equation, with logsumexp for the normalisation)."""
    from scipy.optimize import brentq
    from scipy.special import logsumexp

    from massarc.schema.laws import _log_weights, _tilt

    logf = _log_weights(ZRPModel(family="zrp", b=b), 10)
    m = np.arange(len(logf), dtype=np.float64)

    def excess(theta: float) -> float:
        a = logf + theta * m
        return float(np.exp(a - logsumexp(a)) @ m) - density

    lo, hi = -1.0, 1.0
    while excess(lo) > 0:
        lo *= 2.0
    while excess(hi) < 0:
        hi *= 2.0
    want = brentq(excess, lo, hi, xtol=1e-14, rtol=1e-14)
    assert _tilt(logf, density) == pytest.approx(want, rel=1e-10, abs=1e-12)
