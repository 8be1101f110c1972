"""The stored summaries of runs from the reference sampler against exact results: the
occupation law of exact ZRP steady-state samples, the critical Yule-Simon law, and the
coarsening exponents of the driven (1/2) and symmetric (1/3) ZRP before saturation."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from massarc.archive import open_run
from massarc.schema import parse_metadata
from massarc.schema.laws import canonical_site_law
from massarc.simulate import simulate, snapshot_times
from massarc.summaries import summarize

QUICK = {"probes": 4, "resamples": 199, "window": "all"}


def _zrp(sites: int, drift: str = "asymmetric", b: float = 4.0):
    return parse_metadata({"model": {"family": "zrp", "b": b, "drift": drift},
                           "lattice": {"sites": [sites], "boundary": "periodic"},
                           "run": {"regime": "stationary"}})  # fmt: skip


def _occupation_against(path, law: np.ndarray, bins: int, slack: float = 0.0) -> None:
    """Stored occupation fractions within 5 standard errors (+ slack) of ``law``; the
    errors come from the spread of the per-snapshot fractions (independent samples)."""
    run = open_run(path)
    s = run.summaries
    occ = s.array("occupation")
    frac = occ / occ.sum()
    flat = np.asarray(run.mass[:], dtype=np.int64).reshape(-1, run.sites[0])
    per = np.stack([np.bincount(np.minimum(row, bins - 1), minlength=bins) for row in flat])
    per = per / run.sites[0]
    se = per.std(axis=0, ddof=1) / np.sqrt(len(per))
    top = 8  # the bins that hold nearly all the fluid
    np.testing.assert_array_less(np.abs(frac[:top] - law[:top]), 5 * se[:top] + slack + 1e-12)


def test_occupation_of_exact_zrp_samples_follows_the_canonical_law(tmp_path):
    # outside truth: the exact canonical single-site law P(m) = f(m) Z(N-1, M-m) / Z(N, M)
    # (Evans and Hanney, J. Phys. A 38, R195, 2005), via schema/laws.py
    meta, sites, mass = _zrp(40), 40, 80
    path = tmp_path / "exact.zarr"
    simulate(meta, snapshot_times(99.0, 100), replicas=4, seed=5, mass=mass, exact=True,
             location=path)  # fmt: skip
    summarize(path, {**QUICK, "occupation_bins": mass + 2})
    law = canonical_site_law(meta.model, sites, mass)
    _occupation_against(path, law, mass + 2)


def test_occupation_at_criticality_is_the_yule_simon_law(tmp_path):
    # outside truth: at rho_c the single-site law of u(k) = 1 + b/k is exactly
    # scipy.stats.yulesimon(b - 1, loc=-1) (Evans and Hanney 2005); the canonical law of
    # 1000 sites at rho_c = 1/2 is within 0.0012 of it (schema/laws.py)
    meta = _zrp(1000)
    path = tmp_path / "critical.zarr"
    simulate(meta, snapshot_times(29.0, 30), replicas=4, seed=6, mass=500, exact=True,
             location=path)  # fmt: skip
    summarize(path, {**QUICK, "occupation_bins": 64})
    law = stats.yulesimon(3.0, loc=-1).pmf(np.arange(64))
    _occupation_against(path, law, 64, slack=0.0012)


@pytest.mark.parametrize(
    ("drift", "sites", "t_max", "expected"),
    [("asymmetric", 1000, 1e3, 0.5), ("symmetric", 300, 1e4, 1 / 3)],
)
def test_coarsening_exponent_of_the_typical_mass(tmp_path, drift, sites, t_max, expected):
    # outside truth: condensates coarsen as t^(1/z), z = 2 for the driven ZRP, 3 for the
    # symmetric ZRP (Godreche, J. Phys. A 36, 6313, 2003; Grosskinsky, Schuetz and Spohn,
    # J. Stat. Phys. 113, 389, 2003). Tolerance 0.06: the scatter between seeds is about
    # 0.02 at these sizes (bench/bench_coarsening.py) and early-time corrections bias low
    meta = parse_metadata({"model": {"family": "zrp", "b": 4.0, "drift": drift},
                           "lattice": {"sites": [sites], "boundary": "periodic"},
                           "run": {"regime": "transient"}})  # fmt: skip
    path = tmp_path / f"{drift}.zarr"
    times = snapshot_times(t_max, 40, "log", t_first=1.0)
    simulate(meta, times, replicas=4, seed=1, mass=2 * sites, initial="random", location=path)
    [done] = summarize(path, {"probes": 4, "resamples": 199})
    fit = done.findings["exponents"]["typical_mass"]
    assert fit["expected"] == pytest.approx(expected)
    assert not fit["too_short"] and fit["decades"] > 1.9
    assert fit["exponent"] == pytest.approx(expected, abs=0.06)
