"""The statistics behind the summaries against independent computations: plain NumPy on the
decoded array, and direct O(L^2) sums for G(r, t) (the FFT is only a faster way to the same
numbers). Both backends of the condensate count give the same integers."""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest
from conftest import make_meta, multinomial_run

from massarc.archive import create_run, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import CondensateStatistic, CorrelationStatistic
from massarc.archive.stats._kernels import HAVE_NUMBA
from massarc.archive.stats.condensates import count_above
from massarc.archive.stats.correlation import two_point
from massarc.schema import parse_metadata
from massarc.simulate import sample_steady_state
from massarc.summaries import summarize
from massarc.summaries.build import first_zero


def _write(path: Path, data: np.ndarray, boundary: str | list[str] = "periodic") -> Path:
    meta = make_meta("zrp", sites=data.shape[2:], boundary=boundary, regime="transient", b=4.0)
    with create_run(path, meta, snapshots_hint=7) as w:  # several chunks per replica
        w.append(np.arange(data.shape[1], dtype=float), data)
    return path


@pytest.mark.parametrize("sites", [(24,), (5, 6)])
def test_stored_per_snapshot_summaries_equal_numpy_on_the_decoded_array(tmp_path, sites):
    data = multinomial_run(3, 30, sites, mass=40, seed=4)
    path = _write(tmp_path / "r.zarr", data)
    summarize(path, {"probes": 4, "resamples": 19, "condensate_above": 3.0})
    s = open_run(path).summaries
    # outside truth: plain NumPy on the decoded masses
    flat = np.asarray(open_run(path).mass[:], dtype=np.int64).reshape(3, 30, -1)
    np.testing.assert_array_equal(s.array("largest_mass"), flat.max(axis=2))
    np.testing.assert_array_equal(s.array("largest_site"), flat.argmax(axis=2))
    np.testing.assert_array_equal(s.array("second_moment"), (flat**2).sum(axis=2))
    np.testing.assert_array_equal(s.array("occupied"), (flat > 0).sum(axis=2))
    np.testing.assert_array_equal(s.array("condensates"), (flat > 3).sum(axis=2))
    np.testing.assert_array_equal(s.array("condensate_mass"), np.where(flat > 3, flat, 0).sum(2))
    typical = (flat**2).sum(axis=2) / flat.sum(axis=2)
    np.testing.assert_allclose(s.array("typical_mass"), typical, rtol=1e-12)
    np.testing.assert_allclose(s.array("largest_mass_var"), flat.max(axis=2).var(0, ddof=1))
    hist = np.bincount(flat[:, s.attrs("occupation")["first_snapshot"] :].ravel())
    np.testing.assert_array_equal(s.array("occupation")[: len(hist)], hist)


@pytest.mark.skipif(not HAVE_NUMBA, reason="numba not installed")
@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.int32, np.float64])
def test_condensate_count_is_the_same_with_numba_and_numpy(dtype):
    x = np.random.default_rng(1).integers(0, 50, size=(20, 37)).astype(dtype)
    fast = count_above(x, 17.5, backend="numba")
    slow = count_above(x, 17.5, backend="numpy")
    for a, b in zip(fast, slow, strict=True):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(slow[0], (x > 17.5).sum(axis=1))  # plain NumPy


def _direct(x: np.ndarray, periodic: tuple[bool, ...]) -> tuple[list[np.ndarray], np.ndarray]:
    """G by direct sums over every displacement (O(V^2)), the definition written out."""
    shape = x.shape
    rho2 = x.mean() ** 2
    sums: dict[tuple[int, ...], tuple[float, int]] = {}
    ranges = [range(-(n - 1), n) for n in shape]
    for d in itertools.product(*ranges):
        if any(p and di < 0 for di, p in zip(d, periodic, strict=True)):
            continue  # along a periodic axis lags 0..L-1 cover every pair once
        total, pairs = 0.0, 0
        for i in itertools.product(*[range(n) for n in shape]):
            j = []
            for ik, dk, n, p in zip(i, d, shape, periodic, strict=True):
                jk = ik + dk
                if p:
                    jk %= n
                elif not 0 <= jk < n:
                    break
                j.append(jk)
            else:
                total += float(x[i]) * float(x[tuple(j)])
                pairs += 1
        sums[d] = (total, pairs)
    along = []
    for k, n in enumerate(shape):
        row = []
        for r in range(n):
            d = tuple(r if a == k else 0 for a in range(len(shape)))
            total, pairs = sums[d]
            row.append(total / pairs - rho2)
        along.append(np.array(row))
    radial: dict[int, list[float]] = {}
    if len(shape) == 2:
        for d, (total, pairs) in sums.items():
            if pairs == 0:
                continue
            dist = [min(abs(dk), n - abs(dk)) if p else abs(dk)
                    for dk, n, p in zip(d, shape, periodic, strict=True)]  # fmt: skip
            b = int(np.rint(np.hypot(*dist)))
            acc = radial.setdefault(b, [0.0, 0.0])
            acc[0] += total
            acc[1] += pairs
    rad = np.array([radial[b][0] / radial[b][1] - rho2 for b in sorted(radial)])
    return along, rad


@pytest.mark.parametrize(
    "shape, periodic",
    [((9,), (True,)), ((9,), (False,)), ((4, 5), (True, True)), ((4, 5), (True, False)),
     ((5, 4), (False, False))],
)  # fmt: skip
def test_fft_correlation_equals_the_direct_sums(shape, periodic):
    # outside truth: the definition, summed pair by pair (common practice)
    x = np.random.default_rng(7).integers(0, 6, size=(2, *shape))
    got = two_point(x, periodic)
    for row in range(2):
        along, radial = _direct(x[row], periodic)
        for k in range(len(shape)):
            np.testing.assert_allclose(got["along"][k][row], along[k], atol=1e-10)
        if len(shape) == 2:
            np.testing.assert_allclose(got["radial"][row], radial, atol=1e-10)


def test_walled_sums_are_the_linear_correlation_of_scipy_signal():
    # outside truth: scipy.signal.correlate (not circular) gives the sums between walls
    from scipy.signal import correlate

    x = np.random.default_rng(3).integers(0, 9, size=17).astype(float)
    g = two_point(x[None], (False,))["along"][0][0]
    lin = correlate(x, x, mode="full")[len(x) - 1 :]
    np.testing.assert_allclose((g + x.mean() ** 2) * (len(x) - np.arange(len(x))), lin)


def test_ring_identities_hold_snapshot_by_snapshot():
    # reference facts (from memory, exact on a ring with fixed mass): sum_r G(r) = 0,
    # G(0) = var(m), G(r) = G(L - r)
    x = np.random.default_rng(5).multinomial(60, np.full(20, 1 / 20), size=6)
    g = two_point(x, (True,))["along"][0]
    np.testing.assert_allclose(g.sum(axis=1), 0.0, atol=1e-9)
    np.testing.assert_allclose(g[:, 0], x.var(axis=1), rtol=1e-12)
    np.testing.assert_allclose(g[:, 1:], g[:, :0:-1], atol=1e-9)


def test_zrp_steady_state_is_exchangeable_in_the_stored_correlation(tmp_path):
    # reference fact (from memory): the canonical ZRP measure is exchangeable, so for the
    # average over samples E G(r != 0) = -E G(0) / (L - 1) exactly
    meta = parse_metadata({"model": {"family": "zrp", "b": 4.0},
                           "lattice": {"sites": [12], "boundary": "periodic"},
                           "run": {"regime": "stationary"}})  # fmt: skip
    x = sample_steady_state(meta.model, 12, 18, 4000, np.random.default_rng(11))
    g = two_point(x, (True,))["along"][0]
    mean, err = g.mean(axis=0), g.std(axis=0, ddof=1) / np.sqrt(len(g))
    expected = -mean[0] / 11
    assert np.all(np.abs(mean[1:] - expected) < 5 * err[1:] + 1e-12)
    # and the scan keeps G only at the requested snapshots, averaged over replicas
    path = tmp_path / "ring.zarr"
    with create_run(path, meta) as w:
        w.append(np.arange(10.0), x[:40].reshape(4, 10, 12))
    run = open_run(path)
    stat = CorrelationStatistic(run, at=[2, 9])
    res = scan(run, {"c": stat, "n": CondensateStatistic(run, above=5)}).results["c"]
    want = two_point(x[:40].reshape(4, 10, 12)[:, [2, 9]].reshape(8, 12), (True,))["along"][0]
    np.testing.assert_allclose(res.along[0], want.reshape(4, 2, 12).mean(axis=0), atol=1e-12)
    assert res.replicas.tolist() == [4, 4]


def test_a_2d_run_stores_the_radial_and_axis_correlations(tmp_path):
    data = multinomial_run(2, 12, (4, 6), mass=48, seed=8)
    path = _write(tmp_path / "box.zarr", data, boundary=["periodic", "reflecting"])
    summarize(path, {"probes": 3, "resamples": 19, "zero_crossing": True})
    s = open_run(path).summaries
    probes = s.array("probe_snapshot")
    rows = data[:, probes].reshape(-1, 4, 6)
    want = two_point(rows, (True, False))  # checked against direct sums above
    np.testing.assert_allclose(s.array("correlation_y"), want["along"][0].reshape(2, 3, 4).mean(0))
    np.testing.assert_allclose(s.array("correlation_x"), want["along"][1].reshape(2, 3, 6).mean(0))
    np.testing.assert_allclose(s.array("correlation"), want["radial"].reshape(2, 3, -1).mean(0))
    zero = s.array("correlation_zero")
    assert zero.shape == (3,)
    np.testing.assert_array_equal(zero, first_zero(want["radial"].reshape(2, 3, -1).mean(0)))
    # uncorrelated data: sum G = 0 forces early zero crossings, flagged as meaningless
    flags = s.attrs("correlation_zero")["meaningless"]
    assert flags == [bool(not np.isfinite(v) or v <= 2) for v in zero] and any(flags)
