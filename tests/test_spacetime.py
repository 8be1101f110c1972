"""The ``spacetime`` statistic against plain loops over sites and offsets.

Outside truth: the definitions of the module docstring evaluated literally, site by
site, with NumPy only (no FFT): C(r) = (1/N) sum_i x_i y_{i+r} (cyclic or cut at walls),
its antisymmetric part, windowed sums and first moments, and the susceptibilities K+ and
K- from their bond-by-bond definition. A physical check of K: on a ZRP ring in its steady
state, the product measure makes K[R] the single-site covariance cov(m, u(m)), which is
the fugacity z = <u(m)> (from memory: E[m u(m)] = z E[m + 1] for the grand-canonical
law P(m) ~ z^m f(m), f(m) u(m) = f(m-1)).
"""

from __future__ import annotations

import uuid

import numpy as np
import pytest
from conftest import make_meta

from massarc.archive import create_run, open_run
from massarc.archive.scan import scan
from massarc.schema.laws import hop_rates, site_weights, tilt_to_density
from massarc.simulate import simulate
from massarc.validators.checks.drift.spacetime import (
    VARIANTS,
    SpacetimeStatistic,
    activity_function,
    axis_windows,
)


def _run(x: np.ndarray, meta, times=None, chunk=None):
    loc = f"memory://spacetime-{uuid.uuid4().hex}"
    t = np.arange(x.shape[1], dtype=float) * 0.5 if times is None else times
    with create_run(loc, meta, snapshots_hint=chunk or x.shape[1], strict=False) as w:
        w.append(t, x)
    return open_run(loc)


def _corr(x: np.ndarray, y: np.ndarray, r: int, periodic: bool) -> float:
    """(1/N) sum over lines and sites i of x_i y_{i+r} along the last axis."""
    length = x.shape[-1]
    total = 0.0
    for i in range(length):
        j = i + r
        if periodic:
            j %= length
        elif not 0 <= j < length:
            continue
        total += float((x[..., i] * y[..., j]).sum())
    return total / x.size


def _reference(run, stat, axis: int):
    """Literal evaluation for every start, lag, variant and window of one axis."""
    meta = run.meta
    periodic = meta.lattice.boundary[axis] == "periodic"
    act = activity_function(meta)
    spec = stat.axes[axis]
    win = spec["windows"]
    length = run.sites[axis]
    out = {k: np.full_like(spec[k], np.nan) for k in ("zero", "first", "zero0", "first0")}
    out["suscept_plus"] = np.full_like(spec["suscept_plus"], np.nan)
    out["suscept_minus"] = np.full_like(spec["suscept_minus"], np.nan)
    chunk = run.chunk_snapshots
    for r in range(run.n_replicas):
        data = run.read(r).astype(float)
        for s, t in enumerate(stat.starts):
            if t + 1 >= run.n_snapshots or (t + 1) // chunk != t // chunk:
                continue
            x = np.moveaxis(data[t], axis, -1)
            xs = [x - x.mean(), (x > 0) - (x > 0).mean()]
            for li, lag in enumerate(stat.lags):
                if (t + lag) // chunk != t // chunk or t + lag >= run.n_snapshots:
                    continue
                y = np.moveaxis(data[t + lag], axis, -1)
                y = y - y.mean()
                for v, xv in enumerate(xs):
                    a = [
                        _corr(xv, y, k, periodic) - _corr(xv, y, -k, periodic)
                        for k in range(1, win[-1] + 1)
                    ]
                    out["zero"][r, s, v, li] = np.cumsum(a)[win - 1]
                    out["first"][r, s, v, li] = np.cumsum(np.arange(1, len(a) + 1) * a)[win - 1]
            a0 = [
                _corr(xs[1], xs[0], k, periodic) - _corr(xs[1], xs[0], -k, periodic)
                for k in range(1, win[-1] + 1)
            ]
            out["zero0"][r, s, 1] = np.cumsum(a0)[win - 1]
            out["first0"][r, s, 1] = np.cumsum(np.arange(1, len(a0) + 1) * a0)[win - 1]
            a_site = act(np.moveaxis(data[t], axis, -1))
            plus, minus = a_site.copy(), np.zeros_like(a_site)
            if periodic:
                minus = np.roll(a_site, -1, axis=-1)
            else:
                plus[..., -1] = 0.0
                minus[..., :-1] = a_site[..., 1:]
            for key, field in (("suscept_plus", plus), ("suscept_minus", minus)):
                for k, big_r in enumerate(win):
                    inner = sum(_corr(xs[0], field, j, periodic) for j in range(-big_r, big_r))
                    ends = []
                    for lo, hi in ((big_r, 2 * big_r), (big_r + 1, 2 * big_r + 1)):
                        hi = min(hi, (length - 1) // 2 + 1)
                        lo = min(lo, (length - 1) // 2 + 1)
                        sign = 1 if lo == big_r else -1
                        band = [_corr(xs[0], field, sign * j, periodic) for j in range(lo, hi + 1)]
                        ends.append(np.mean(band))
                    out[key][r, s, k] = inner - big_r * sum(ends)
    return out


@pytest.mark.parametrize(
    ("sites", "boundary", "family"),
    [
        ((13,), "periodic", "zrp"),
        ((12,), "reflecting", "cmam"),
        ((6, 9), ["reflecting", "periodic"], "zrp"),
    ],
)
def test_sums_match_a_literal_evaluation(sites, boundary, family):
    meta = make_meta(family, sites=sites, boundary=boundary)
    rng = np.random.default_rng(4)
    x = rng.poisson(1.2, size=(2, 40, *sites)).astype(np.uint16)
    run = _run(x, meta, chunk=16)  # chunks of 16: some lags cross a chunk edge
    stat = SpacetimeStatistic(run, lags=(1, 3, 10))
    got = scan(run, {"spacetime": stat}).results["spacetime"]
    assert len(got.starts) == 40  # a small run is visited at every snapshot
    for axis, data in enumerate(got.axes):
        ref = _reference(run, stat, axis)
        assert np.array_equal(data.windows, axis_windows(sites[axis]))
        for key, want in ref.items():
            have = getattr(data, key)
            np.testing.assert_array_equal(np.isnan(have), np.isnan(want), err_msg=key)
            np.testing.assert_allclose(have, want, rtol=1e-9, atol=1e-9, err_msg=key)


def test_lags_reaching_past_a_chunk_are_left_out():
    meta = make_meta("zrp", sites=(10,))
    x = np.random.default_rng(1).poisson(1.0, size=(1, 30, 10)).astype(np.uint8)
    run = _run(x, meta, chunk=10)
    stat = SpacetimeStatistic(run, lags=(1, 3))
    data = scan(run, {"spacetime": stat}).results["spacetime"].axes[0]
    starts = np.arange(30)
    for li, lag in enumerate((1, 3)):
        missing = (starts % 10) + lag >= 10
        assert np.array_equal(np.isnan(data.dt[0, :, li]), missing)
        np.testing.assert_allclose(data.dt[0, ~missing, li], 0.5 * lag)


def test_zrp_susceptibility_is_the_fugacity():
    meta = make_meta("zrp", sites=(64,), b=4.0, drift="asymmetric")
    loc = f"memory://spacetime-{uuid.uuid4().hex}"
    run = simulate(
        meta, np.arange(300) * 5.0, replicas=4, seed=2, mass=24,
        initial="steady-state", location=loc,
    )  # fmt: skip
    data = scan(run, {"spacetime": SpacetimeStatistic(run)}).results["spacetime"].axes[0]
    law = tilt_to_density(site_weights(meta.model, 400), 24 / 64)
    z = float(law @ hop_rates(meta.model, 400))  # grand-canonical fugacity at rho = 3/8
    k1 = np.nanmean(data.suscept_plus[:, :, 0])
    assert abs(k1 - z) < 0.05 * z, (k1, z)
    assert VARIANTS == ("mass", "occupancy")
