"""The ``fingerprints`` statistic against plain Python integer arithmetic.

Outside truth: the hash of the module docstring, mix(sum_j k_j m_j mod 2^64), evaluated
with Python integers (unbounded, reduced mod 2^64 by hand) and the splitmix64 finaliser
written out from its published constants (from memory: Steele, Lea and Flood, "Fast
splittable pseudorandom number generators", OOPSLA 2014); rolls from ``numpy.roll``;
the compiled and NumPy paths must agree bit for bit.
"""

from __future__ import annotations

import os
from types import SimpleNamespace

import numpy as np
import pytest
from _audit_runs import write_run

from massarc.archive import Chunk, open_run
from massarc.archive.scan import scan
from massarc.archive.stats import HistogramStatistic, SnapshotStatistic
from massarc.validators.checks.independence.fingerprints import FingerprintStatistic

MASK = (1 << 64) - 1


def _mix(x: int) -> int:
    x = ((x ^ (x >> 30)) * 0xBF58476D1CE4E5B9) & MASK
    x = ((x ^ (x >> 27)) * 0x94D049BB133111EB) & MASK
    return x ^ (x >> 31)


def _stat(x: np.ndarray, **options) -> FingerprintStatistic:
    reps, snaps = x.shape[:2]
    run = SimpleNamespace(n_replicas=reps, n_snapshots=snaps, sites=x.shape[2:], dtype=x.dtype)
    stat = FingerprintStatistic(run, **options)
    for r in range(reps):
        for start in range(0, snaps, 7):  # chunks of 7 snapshots
            c = Chunk(r, start, min(snaps, start + 7), x[r, start : start + 7])
            stat.merge(c, stat.chunk(c))
    return stat


def _hash(values, keys) -> int:
    return _mix(sum(int(v) * int(k) for v, k in zip(values, keys, strict=True)) & MASK)


@pytest.mark.parametrize("shape", [(23,), (6, 9)])
def test_hashes_follow_their_definition(shape):
    rng = np.random.default_rng(3)
    x = rng.poisson(2.0, size=(2, 9, *shape)).astype(np.uint16)
    stat = _stat(x)
    fp = stat.finish([])
    keys = [int(k) for k in stat.site_keys.reshape(-1)]
    marker_keys = [int(k) for k in stat.marker_keys]
    for r in range(2):
        for t in range(9):
            snap = x[r, t]
            flat = [int(v) for v in snap.reshape(-1)]
            at = [int(np.ravel_multi_index(tuple(o), shape)) for o in stat.offsets]
            assert int(fp.sparse[r, t]) == _hash([flat[i] for i in at], marker_keys)
            anchor = int(np.argmax(snap))
            assert int(fp.anchor[r, t]) == anchor
            a = np.unravel_index(anchor, shape)
            moved = [
                int(np.ravel_multi_index(tuple((np.array(a) + o) % shape), shape))
                for o in stat.offsets
            ]
            assert int(fp.anchored[r, t]) == _hash([flat[i] for i in moved], marker_keys)
            assert fp.sampled[t]  # a small run: every snapshot gets its full hashes
            assert int(fp.full[r, t]) == _hash(flat, keys)
            # relative to the anchor: the snapshot rolled so that the anchor sits at 0
            back = np.roll(snap, tuple(-int(c) for c in a), axis=tuple(range(len(shape))))
            assert int(fp.full_anchored[r, t]) == _hash(back.reshape(-1), keys)


@pytest.mark.parametrize("dtype", ["uint8", "uint16", "int32", "int64", "float64"])
@pytest.mark.parametrize("shape", [(31,), (8, 11)])
def test_compiled_and_numpy_paths_agree(dtype, shape, monkeypatch):
    rng = np.random.default_rng(5)
    x = rng.poisson(1.5, size=(2, 20, *shape)).astype(dtype)
    results = []
    for pure in ("0", "1"):
        monkeypatch.setenv("MASSARC_PURE", pure)
        results.append(_stat(x, floor=0, fraction=0.5).finish([]))
    a, b = results
    for key in ("sparse", "anchored", "full", "full_anchored", "anchor", "sampled"):
        np.testing.assert_array_equal(getattr(a, key), getattr(b, key), err_msg=key)
    assert 0 < a.sampled.mean() < 1
    assert os.environ["MASSARC_PURE"] == "1"


@pytest.mark.parametrize("shape", [(40,), (10, 13)])
def test_a_rolled_copy_keeps_its_anchored_hashes(shape):
    rng = np.random.default_rng(8)
    x = rng.poisson(1.0, size=(2, 30, *shape)).astype(np.uint16)
    x[0, :, *(0,) * len(shape)] = 9  # a unique largest mass: the anchor is unambiguous
    shift = (7, 4)[: len(shape)]
    x[1] = np.roll(x[0], shift, axis=tuple(range(1, 1 + len(shape))))
    fp = _stat(x).finish([])
    np.testing.assert_array_equal(fp.anchored[0], fp.anchored[1])
    np.testing.assert_array_equal(fp.full_anchored[0], fp.full_anchored[1])
    assert not np.any(fp.sparse[0] == fp.sparse[1])
    assert not np.any(fp.full[0] == fp.full[1])


def test_the_hashed_subset_is_shared_by_replicas_and_has_its_density():
    x = np.random.default_rng(2).poisson(1.0, size=(3, 4000, 50)).astype(np.uint8)
    fp = _stat(x, floor=0, fraction=0.25).finish([])
    assert fp.sampled.shape == (4000,)
    assert abs(fp.sampled.mean() - 0.25) < 0.03  # binomial: sd 0.007
    # the full hashes are kept for the sampled snapshots only, in the order of time
    np.testing.assert_array_equal(fp.slot >= 0, fp.sampled)
    np.testing.assert_array_equal(fp.slot[fp.sampled], np.arange(fp.sampled.sum()))
    assert fp.full.shape == fp.full_anchored.shape == (3, fp.sampled.sum())
    assert np.all(fp.full != 0) and np.all(fp.full_anchored != 0)


def test_the_anchors_come_from_the_snapshots_loop_when_both_run(tmp_path, monkeypatch):
    from massarc.archive.stats import _kernels

    calls = []
    real = _kernels.reduce_rows

    def counting(x, start, plan, **kw):
        calls.append(start)
        return real(x, start, plan, **kw)

    monkeypatch.setattr(_kernels, "reduce_rows", counting)
    run = open_run(write_run(tmp_path / "r.zarr", replicas=2, snapshots=30, chunk=10))
    alone = scan(run, {"fingerprints": FingerprintStatistic(run)}, workers=2)
    assert len(calls) == 6  # its own loop: one reduction per chunk
    calls.clear()
    stats = {  # listed first: it must still find the loop the other two share
        "fingerprints": FingerprintStatistic(run),
        "snapshots": SnapshotStatistic(run),
        "histogram": HistogramStatistic(run, bins=16),
    }
    shared = scan(run, stats, workers=2)
    assert len(calls) == len(run.chunk_refs()) == 6
    fp, snap = shared.results["fingerprints"], shared.results["snapshots"]
    np.testing.assert_array_equal(fp.anchor, snap.argmax)
    np.testing.assert_array_equal(fp.anchored, alone.results["fingerprints"].anchored)
