"""``massarc compare``: two runs of one model tested for agreement.

Runs of the reference sampler (ZRP u(k) = 1 + b/k on a ring of 32 sites, condensed at
rho = 1.5, started from exact steady-state samples) play two groups' runs. The tests are
checked against scipy.stats and textbook formulas on worked inputs, and the effective-size
correction against runs whose snapshots repeat each other.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats

import massarc
from massarc.archive import Run, create_run, open_run
from massarc.cli import cli
from massarc.schema import parse_metadata
from massarc.simulate import simulate
from massarc.summaries import summarize
from massarc.summaries.compare import CompareRefused, Comparison, compare_runs
from massarc.summaries.compare.agreement import (
    correlation_test,
    holm,
    largest_mass_test,
    occupation_test,
)

SAMPLES = Path(__file__).resolve().parents[1] / "samples"
CHEAP = {"resamples": 9, "extreme_max": 20}


def _meta(b: float):
    return parse_metadata(
        {
            "model": {"family": "zrp", "b": b, "drift": "asymmetric"},
            "lattice": {"sites": [32], "boundary": "periodic"},
            "run": {"regime": "stationary"},
        }
    )


def _claiming(run: Run, b: float, path: Path, repeat: int = 1) -> Run:
    """``run`` stored at ``path`` claiming b (each snapshot ``repeat`` times when > 1)."""
    meta = _meta(b).model_copy(update={"run": run.meta.run})
    masses = np.stack([run.read(r) for r in range(run.n_replicas)])
    times = np.asarray(run.times)
    if repeat > 1:  # every snapshot kept for `repeat` snapshots: strongly autocorrelated
        step = np.diff(times).min() / repeat
        times = (times[:, None] + step * np.arange(repeat)[None, :]).ravel()
        masses = np.repeat(masses, repeat, axis=1)
    with create_run(path, meta) as w:
        w.append(times, masses)
    return open_run(path)


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, Path]:
    """Two honest runs (b = 4, seeds 1 and 2), one simulated at b = 4.8 claiming b = 4,
    and the two honest ones with every snapshot repeated 8 times (summaries not stored)."""
    root = tmp_path_factory.mktemp("compare")
    out = {}
    for name, b, seed in (("a", 4.0, 1), ("b", 4.0, 2), ("wrong", 4.8, 3)):
        run = simulate(
            _meta(b), 10.0 * np.arange(1, 401), replicas=4, seed=seed, mass=48,
            initial="steady-state", location=f"memory://compare-{name}",
        )  # fmt: skip
        out[name] = root / f"{name}.zarr"
        summarize(_claiming(run, 4.0, out[name]), CHEAP)
        if name != "wrong":
            out[f"{name}8"] = root / f"{name}8.zarr"
            _claiming(run, 4.0, out[f"{name}8"], repeat=8)
    return out


def _cli(*args: str):
    return CliRunner().invoke(cli, ["compare", *args], catch_exceptions=False)


def test_honest_pair_agrees_and_prints_the_metadata(runs):
    out = _cli(str(runs["a"]), str(runs["b"]))
    assert out.exit_code == 0, out.output
    assert "model.b" in out.output and "pass: the runs are compatible" in out.output
    res = compare_runs(runs["a"], runs["b"])
    assert res.status == "pass"
    assert [o.status for o in res.observables] == ["pass", "pass", "pass"]
    assert res.sources == ("stored", "stored")


def test_a_run_with_b_20_percent_off_disagrees_and_the_observable_is_named(runs):
    res = compare_runs(runs["a"], runs["wrong"])
    assert res.status == "fail"
    assert res.failed()
    out = _cli(str(runs["a"]), str(runs["wrong"]))
    assert out.exit_code == 1
    assert f"fail: the runs are incompatible: {', '.join(res.failed())}" in out.output


def test_different_models_are_refused_unless_forced(runs):
    out = _cli(str(SAMPLES / "depot-ring.zarr"), str(SAMPLES / "dune-strip.zarr"))
    assert out.exit_code == 2
    (line,) = out.output.strip().splitlines()
    assert "claim different models" in line and "model.family: 'zrp' vs 'cmam'" in line
    assert "--force" in line
    with pytest.raises(CompareRefused, match="different models"):
        compare_runs(SAMPLES / "depot-ring.zarr", SAMPLES / "dune-strip.zarr")
    # forced: the claims are listed as different, the tests run
    forced = compare_runs(runs["a"], SAMPLES / "depot-ring.zarr", force=True)
    assert forced.forced
    assert any(d.key == "lattice.sites" and not d.same for d in forced.metadata)


def test_a_transient_run_is_not_compared_and_the_reason_is_given():
    out = _cli(str(SAMPLES / "dune-strip.zarr"), str(SAMPLES / "dune-strip.zarr"))
    assert out.exit_code == 2
    assert "nothing to compare" in out.output and "declares a transient regime" in out.output
    res = compare_runs(SAMPLES / "dune-strip.zarr", SAMPLES / "dune-strip.zarr")
    assert res.status == "skip"
    assert all("transient" in o.reason for o in res.observables)


def test_bad_input_exits_2_with_one_line(runs, tmp_path):
    for args in (
        [str(tmp_path / "none.zarr"), str(runs["a"])],
        [str(runs["a"]), str(runs["b"]), "--level", "1.5"],
        [str(runs["a"]), str(runs["b"]), "--format", "json"],
    ):
        out = _cli(*args)
        assert out.exit_code == 2 and len(out.output.strip().splitlines()) == 1, args


def test_json_output_is_schema_stable(runs):
    out = _cli(str(runs["a"]), str(runs["b"]), "--as", "json")
    assert out.exit_code == 0
    doc = json.loads(out.output)
    assert sorted(doc) == [
        "a", "b", "correction", "forced", "level", "massarc_version", "metadata",
        "observables", "sources", "status", "windows",
    ]  # fmt: skip
    assert [o["observable"] for o in doc["observables"]] == [
        "occupation", "largest-mass", "correlation",
    ]  # fmt: skip
    for o in doc["observables"]:
        assert sorted(o) == [
            "adjusted_p", "detail", "dof", "null", "observable", "p_value", "reason", "sizes",
            "statistic", "status", "test",
        ]  # fmt: skip
    assert sorted(doc["metadata"][0]) == ["a", "b", "key", "kind", "same"]
    assert Comparison.model_validate(doc).status == "pass"  # the document reads back


def test_public_api():
    assert "compare_runs" in massarc.__all__ and massarc.compare_runs is compare_runs


def test_repeated_snapshots_do_not_inflate_significance(runs):
    """Each snapshot stored 8 times holds no more information: the effective sizes stay
    those of the original runs (within the noise of their estimate), not 8 times larger,
    and the verdict stays pass. The runs are only read (their summaries are computed in
    memory and not written)."""
    plain = compare_runs(runs["a"], runs["b"])
    repeated = compare_runs(runs["a8"], runs["b8"])
    assert repeated.sources == ("computed", "computed")
    assert open_run(runs["a8"]).summaries is None
    assert repeated.status == "pass"
    for p, r in zip(plain.observables, repeated.observables, strict=True):
        assert p.sizes is not None and r.sizes is not None
        for sp, sr in zip(p.sizes, r.sizes, strict=True):
            assert sr < 2.0 * sp, (p.observable, p.sizes, r.sizes)


# ---- the tests themselves, on worked inputs ----------------------------------------------


def test_occupation_test_is_the_g_test_and_scales_with_the_effective_counts():
    a = np.array([50, 30, 12, 5, 2, 1])
    b = np.array([40, 35, 15, 6, 3, 1])
    one = occupation_test(a, b, (1.0, 1.0), min_expected=5.0)
    # G = 2 sum O ln(O / E) over the merged 2 x k table (textbook G test of homogeneity,
    # from memory), E from the pooled proportions; p from scipy.stats.chi2 with k - 1 dof
    merged = np.array([[50, 30, 12, 5 + 2 + 1], [40, 35, 15, 6 + 3 + 1]], dtype=float)
    expected = merged.sum(axis=1, keepdims=True) * merged.sum(axis=0) / merged.sum()
    g = 2.0 * float((merged * np.log(merged / expected)).sum())
    assert one.statistic == pytest.approx(g, rel=1e-12)
    assert one.p_value == pytest.approx(stats.chi2.sf(g, 3), rel=1e-10)
    # a quarter of the draws effective: counts, and so G, a quarter (the bins merged the same)
    big = occupation_test(4 * a, 4 * b, (0.25, 0.25), min_expected=5.0)
    assert big.statistic == pytest.approx(one.statistic, rel=1e-12)


def test_largest_mass_test_matches_scipy_ks_2samp_at_full_size():
    rng = np.random.default_rng(7)
    x, y = rng.poisson(20, size=300), rng.poisson(23, size=200)
    ours = largest_mass_test(x, y, (300.0, 200.0))
    ref = stats.ks_2samp(x, y, method="asymp")  # scipy.stats, the outside reference
    assert ours.statistic == pytest.approx(ref.statistic)
    assert ours.p_value == pytest.approx(ref.pvalue, rel=1e-9)
    # with a tenth of the draws effective the same D is far less significant
    assert ours.p_value < 1e-3
    assert largest_mass_test(x, y, (30.0, 20.0)).p_value > 100 * ours.p_value


def test_correlation_test_is_hotellings_two_sample_t2():
    rng = np.random.default_rng(3)
    xa = rng.normal(size=(30, 3)) + np.array([0.0, 0.2, 0.0])
    xb = rng.normal(size=(30, 3))
    ours = correlation_test(xa, xb, (30.0, 30.0), distances=3)
    # Hotelling's two-sample T^2 with the pooled covariance, equal sizes n: T^2 = n/2 d'
    # S_p^-1 d and (2n - k - 1) / (k (2n - 2)) T^2 ~ F(k, 2n - k - 1) (from memory)
    n, k = 30, 3
    d = xa.mean(axis=0) - xb.mean(axis=0)
    pooled = (np.cov(xa, rowvar=False) + np.cov(xb, rowvar=False)) / 2.0
    t2 = n / 2.0 * d @ np.linalg.solve(pooled, d)
    assert ours.statistic == pytest.approx(t2, rel=1e-10)
    f = (2 * n - k - 1) / (k * (2 * n - 2)) * t2
    assert ours.p_value == pytest.approx(stats.f.sf(f, k, 2 * n - k - 1), rel=1e-10)
    # one distance: the statistic is Welch's t squared (scipy.stats.ttest_ind)
    one = correlation_test(xa[:20, :1], xb[:, :1], (20.0, 30.0), distances=1)
    welch = stats.ttest_ind(xa[:20, 0], xb[:, 0], equal_var=False)
    assert one.statistic == pytest.approx(welch.statistic**2, rel=1e-10)


def test_holm_adjusted_p_values():
    # Holm (1979) step-down: sorted p (0.01, 0.02, 0.03, 0.2) times (4, 3, 2, 1), running
    # maximum (worked by hand, from memory of the procedure)
    assert holm([0.03, 0.01, 0.2, 0.02]) == pytest.approx([0.06, 0.04, 0.2, 0.06])
    assert holm([0.5]) == [0.5]
    assert all(math.isclose(p, 1.0) for p in holm([0.6, 0.7]))
