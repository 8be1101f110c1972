"""The statistical derivations of the summaries against outside truth: scipy.stats fitting
the same sample, the Gumbel moments, the Gumbel Fisher information, scipy's
extreme-value conventions, the calibration of the p-values and standard errors, and the
published critical densities."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from massarc.schema import parse_metadata
from massarc.summaries.extremes import _ks_p, extreme_sample, fit_extremes, fit_law
from massarc.summaries.growth import fit_growth
from massarc.summaries.replicas import bootstrap_intervals, over_replicas
from massarc.summaries.theory import expected_condensate

EULER_GAMMA = 0.5772156649015329


@pytest.mark.parametrize(("mu", "beta"), [(100.0, 5.0), (-3.0, 0.4)])
def test_gumbel_mean_and_variance_are_recovered_on_synthetic_samples(mu, beta):
    # outside truth (from memory, any extreme-value text): a Gumbel(mu, beta) law has
    # mean mu + gamma beta and variance pi^2 beta^2 / 6
    x = stats.gumbel_r.rvs(loc=mu, scale=beta, size=4000, random_state=12)
    g = fit_extremes(x)["laws"]["gumbel"]
    se = beta * math.pi / math.sqrt(6 * len(x))  # standard error of a mean of 4000 draws
    assert g["mean"] == pytest.approx(mu + EULER_GAMMA * beta, abs=4 * se)
    assert g["var"] == pytest.approx(math.pi**2 * beta**2 / 6, rel=0.08)
    loc, scale = g["params_mass"]
    assert loc == pytest.approx(mu, abs=4 * se) and scale == pytest.approx(beta, rel=0.05)


def test_fits_agree_with_scipy_stats_fitting_the_same_sample():
    # outside truth: scipy.stats' own maximum-likelihood fits of the standardised sample
    x = stats.invweibull.rvs(4.0, loc=10.0, scale=30.0, size=1500, random_state=3)
    fits = fit_extremes(x)
    z = (x - x.mean()) / x.std(ddof=1)
    assert fits["laws"]["gumbel"]["params"] == pytest.approx(stats.gumbel_r.fit(z), rel=1e-6)
    gev = stats.genextreme.fit(z, -0.25, loc=0.0, scale=1.0)  # started near the truth
    ours = fits["laws"]["gev"]
    assert -ours["loglik"] <= stats.genextreme.nnlf(gev, z) + 1e-3
    assert ours["params"] == pytest.approx(gev, abs=0.02)
    frechet = stats.invweibull.fit(z, *fits["laws"]["frechet"]["params"][:1],
                                   loc=ours["params"][1] - 4, scale=4.0)  # fmt: skip
    assert fits["laws"]["frechet"]["loglik"] >= -stats.invweibull.nnlf(frechet, z) - 1e-3
    assert fits["laws"]["frechet"]["xi"] == pytest.approx(1 / frechet[0], abs=0.02)
    assert fits["best"] in ("frechet", "gev")
    assert "Gumbel limit" in fits["laws"]["weibull"]["note"]  # xi > 0: no Weibull maximum
    w = stats.weibull_max.rvs(3.0, loc=50.0, scale=10.0, size=1500, random_state=4)
    wfit = fit_extremes(w)["laws"]["weibull"]
    zw = (w - w.mean()) / w.std(ddof=1)
    ref = stats.weibull_max.fit(zw, 3.0, loc=wfit["params"][1], scale=wfit["params"][2])
    assert wfit["loglik"] >= -stats.weibull_max.nnlf(ref, zw) - 1e-3
    assert wfit["params"][0] == pytest.approx(ref[0], rel=0.02)


def test_scipy_extreme_value_conventions():
    # reference facts: genextreme's c = -xi; genextreme(c=0) is gumbel_r; invweibull(c) is
    # the Frechet law with cdf exp(-x^-c) (scipy.stats documentation)
    x = np.linspace(-2, 5, 50)
    np.testing.assert_allclose(stats.genextreme(0.0).cdf(x), stats.gumbel_r.cdf(x))
    y = np.linspace(0.2, 5, 50)
    np.testing.assert_allclose(stats.invweibull(3.0).cdf(y), np.exp(-(y**-3.0)))
    heavy = stats.invweibull.rvs(2.0, size=1500, random_state=8)  # xi = 1/2 > 0
    fit = fit_extremes(heavy)["laws"]["gev"]
    assert fit["params"][0] < 0 and fit["xi"] == pytest.approx(0.5, abs=0.1)


def test_gumbel_standard_errors_match_the_fisher_information():
    # outside truth (from memory): for Gumbel maximum likelihood, n Var(loc) -> 1.1087 b^2
    # and n Var(scale) -> 0.6079 b^2 (inverse Fisher information)
    n = 3000
    x = stats.gumbel_r.rvs(loc=2.0, scale=1.0, size=n, random_state=21)
    g = fit_extremes(x)["laws"]["gumbel"]
    b = g["params_mass"][1]
    se_loc, se_scale = g["stderr_mass"]
    assert se_loc == pytest.approx(math.sqrt(1.1087 / n) * b, rel=0.05)
    assert se_scale == pytest.approx(math.sqrt(0.6079 / n) * b, rel=0.05)


def test_half_sample_p_values_are_calibrated_and_have_power():
    # H0: Gumbel with unknown parameters. Statistic: KS distance. The half-sample p-value
    # is uniform under H0 (Durbin's method; from memory), so about 5 % fall below 0.05
    rng = np.random.default_rng(30)
    p = []
    for k in range(200):
        z = stats.gumbel_r.rvs(size=200, random_state=rng)
        z = (z - z.mean()) / z.std(ddof=1)
        params, _ = fit_law("gumbel", z)
        p.append(_ks_p(z, {"gumbel": params}, "half-sample", 0, seed=k)["gumbel"][1])
    low = np.mean(np.array(p) < 0.05)
    assert 0.01 <= low <= 0.10, low  # binomial(200, 0.05): 3 sd either side
    normal = stats.norm.rvs(size=3000, random_state=31)
    assert fit_extremes(normal)["laws"]["gumbel"]["p_value"] < 1e-3


def test_the_parametric_bootstrap_p_value_runs_through_scipy():
    x = stats.gumbel_r.rvs(size=150, random_state=40)
    fits = fit_extremes(x, gof="bootstrap", draws=19, seed=1)
    assert fits["gof_method"] == "bootstrap"
    assert 0.0 < fits["laws"]["gumbel"]["p_value"] <= 1.0


def test_extreme_sample_thins_to_the_cap_and_skips_unreadable_replicas():
    largest = np.arange(40).reshape(4, 10)
    valid = np.ones((4, 10), bool)
    valid[2, 3] = False
    sample, stride = extreme_sample(largest, valid, 2, 1, 12)
    assert stride == 2 and sample.size <= 12
    assert not np.isin(np.arange(20, 30), sample).any()


def test_growth_exponent_and_its_bootstrap_error_are_calibrated():
    # synthetic power laws with multiplicative noise: the exponent is recovered and the
    # replica-bootstrap error matches the spread over independent repetitions
    rng = np.random.default_rng(50)
    t = np.geomspace(1, 1e4, 60)
    est, err = [], []
    for _ in range(40):
        slopes = 0.4 + 0.03 * rng.standard_normal(16)
        y = 2.0 * t[None, :] ** slopes[:, None] * np.exp(0.05 * rng.standard_normal((16, 60)))
        fit = fit_growth(t, y, 1.0, 1e4, expected=0.4, resamples=299, seed=1)
        est.append(fit["exponent"])
        err.append(fit["stderr"])
    assert np.mean(est) == pytest.approx(0.4, abs=0.01)
    assert np.mean(err) == pytest.approx(np.std(est, ddof=1), rel=0.35)


def test_a_short_fitting_range_is_flagged():
    t = np.geomspace(1, 1e4, 60)
    y = np.vstack([t**0.5, 1.1 * t**0.5])
    assert fit_growth(t, y, 100.0, 500.0)["too_short"]  # 0.7 decades
    assert not fit_growth(t, y, 1.0, 1e3)["too_short"]
    one = fit_growth(t, y[:1], 1.0, 1e3)
    assert one["exponent"] == pytest.approx(0.5) and "one replica" in one["error_method"]


def test_replica_statistics_and_intervals():
    x = np.random.default_rng(60).normal(10.0, 2.0, size=(400, 3))
    mean, var = over_replicas(x)
    np.testing.assert_allclose(mean, x.mean(axis=0))
    np.testing.assert_allclose(var, x.var(axis=0, ddof=1))
    ci_mean, ci_var = bootstrap_intervals(x, resamples=999, confidence=0.95, seed=1)
    # outside truth: the t interval of a mean of 400 draws (scipy.stats.t)
    half = stats.t.ppf(0.975, 399) * x.std(axis=0, ddof=1) / 20
    np.testing.assert_allclose(ci_mean[:, 1] - ci_mean[:, 0], 2 * half, rtol=0.15)
    # and the chi-square interval of a normal variance (scipy.stats.chi2)
    s2 = x.var(axis=0, ddof=1)
    chi = 399 * s2[:, None] / stats.chi2.ppf([0.975, 0.025], 399)
    np.testing.assert_allclose(ci_var[:, 1] - ci_var[:, 0], chi[:, 1] - chi[:, 0], rtol=0.2)
    assert np.isnan(bootstrap_intervals(x[:1], resamples=99, confidence=0.9, seed=0)[0]).all()


@pytest.mark.parametrize(
    ("model", "rho_c"),
    [
        # Majumdar, Krishnamurthy and Barma, PRL 81, 3691 (1998): D = w = 1 gives
        # rho_c = sqrt(2) - 1 (from memory)
        ({"family": "cmam", "diffusion": 1.0, "chipping": 1.0}, math.sqrt(2) - 1),
        # Evans and Hanney, J. Phys. A 38, R195 (2005): u(k) = 1 + b/k, rho_c = 1/(b - 2)
        ({"family": "zrp", "b": 4.0}, 0.5),
        ({"family": "zrp", "b": 2.5}, 2.0),
    ],
)
def test_critical_densities_and_the_expected_condensate(model, rho_c):
    meta = parse_metadata({"model": model, "lattice": {"sites": [200], "boundary": "periodic"},
                           "run": {"regime": "stationary", "total_mass": 600}})  # fmt: skip
    got = expected_condensate(meta)
    assert got["rho_c"] == pytest.approx(rho_c, rel=1e-12)
    assert got["mass"] == pytest.approx(max(3.0 - rho_c, 0) * 200)
    assert got["fraction"] == pytest.approx(1 - rho_c / 3.0)
