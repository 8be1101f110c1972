"""The single pass: every chunk once, in parallel, bounded, with faults isolated."""

from __future__ import annotations

import threading
import time

import numpy as np
import pytest
from _audit_runs import chunk_file, write_run

from massarc.archive import open_run
from massarc.archive._chunk_read import ChunkReader
from massarc.archive.scan import Statistic, scan
from massarc.archive.stats import HistogramStatistic, SnapshotStatistic


class _Pairs(Statistic):
    """Records every pair the engine hands over, and the chunk-internal pairs itself."""

    name = "test-pairs"
    pairs = True

    def __init__(self, run, **options):
        super().__init__(run, **options)
        self.seen: dict[tuple[int, int], float] = {}
        self.delay = options.get("delay", 0.0)

    def chunk(self, chunk):
        if self.delay:  # later chunks finish first: out-of-order completion
            time.sleep(self.delay * (1 + (chunk.start * 7919) % 5))
        d = np.diff(chunk.mass.reshape(len(chunk.mass), -1).astype(np.int64), axis=0)
        return [(chunk.start + i + 1, float(np.abs(d[i]).sum())) for i in range(len(d))]

    def merge(self, ref, partial):
        for index, v in partial:
            self.seen[(ref.replica, index)] = v

    def pair(self, replica, index, before, after):
        key = (replica, index)
        assert key not in self.seen, f"pair {key} handed over twice"
        self.seen[key] = float(np.abs(after.astype(np.int64) - before.astype(np.int64)).sum())

    def finish(self, faults):
        return self.seen


def _truth(run) -> dict[tuple[int, int], float]:
    """Every consecutive pair, from whole replicas read with zarr-python (reference)."""
    out = {}
    for r in range(run.n_replicas):
        x = np.asarray(run.mass[r, : run.n_snapshots]).reshape(run.n_snapshots, -1)
        d = np.abs(np.diff(x.astype(np.int64), axis=0)).sum(axis=1)
        out.update({(r, i + 1): float(v) for i, v in enumerate(d)})
    return out


@pytest.mark.parametrize("workers", [1, 3])
def test_pairs_across_edges_with_out_of_order_completion(tmp_path, workers) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", replicas=2, snapshots=57, chunk=7))
    stat = _Pairs(run, delay=0.002)
    res = scan(run, {"test-pairs": stat}, workers=workers, in_flight=4)
    assert res.faults == [] and res.errors == {}
    assert res.results["test-pairs"] == _truth(run)
    assert res.chunks_read == len(run.chunk_refs()) == 2 * 9


def test_parallel_equals_sequential_and_zarr_path(tmp_path) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", replicas=3, snapshots=64, sites=(6, 5)))
    outs = []
    for workers, direct in ((1, False), (4, True), (2, False)):
        stats = {
            "snapshots": SnapshotStatistic(run),
            "histogram": HistogramStatistic(run, bins=8, blocks=5),
        }
        outs.append(scan(run, stats, workers=workers, direct=direct).results)
    for other in outs[1:]:
        for f in ("total", "maximum", "sum_sq", "occupied", "argmax", "valid"):
            np.testing.assert_array_equal(
                getattr(outs[0]["snapshots"], f), getattr(other["snapshots"], f)
            )
        np.testing.assert_array_equal(outs[0]["histogram"].counts, other["histogram"].counts)
    # reference: numpy over the whole array read by zarr-python
    x = np.asarray(run.mass[:]).reshape(3, 64, -1).astype(np.int64)
    np.testing.assert_array_equal(outs[1]["snapshots"].total, x.sum(axis=2))
    np.testing.assert_array_equal(outs[1]["snapshots"].argmax, x.argmax(axis=2))
    assert outs[1]["histogram"].counts.sum() == x.size


@pytest.mark.parametrize(
    ("dtype", "sites"), [("uint8", (9,)), ("uint16", (4, 6)), ("uint32", (5,)), ("int32", (7,))]
)
def test_direct_reader_matches_zarr(tmp_path, dtype, sites) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", snapshots=25, sites=sites, dtype=dtype))
    reader = ChunkReader(run)
    assert reader.direct
    for ref in run.chunk_refs():
        a, b = reader.read(ref).mass, run.read_chunk(ref).mass
        assert a.dtype == b.dtype and a.shape == b.shape
        np.testing.assert_array_equal(a, b)


def _damage(path, replica, k, how):
    f = chunk_file(path, replica, k)
    if how == "delete":
        f.unlink()
    elif how == "flip":
        raw = bytearray(f.read_bytes())
        raw[len(raw) // 2] ^= 0xFF
        raw[len(raw) // 3] ^= 0x5A
        f.write_bytes(bytes(raw))
    else:
        f.write_bytes(f.read_bytes()[: len(f.read_bytes()) // 2])


@pytest.mark.parametrize("direct", [True, False])
@pytest.mark.parametrize(
    ("how", "kind"), [("delete", "missing"), ("flip", "corrupt"), ("truncate", "corrupt")]
)
def test_faults_are_named_and_isolated(tmp_path, direct, how, kind) -> None:
    path = write_run(tmp_path / "r.zarr", replicas=2, snapshots=40, chunk=10)
    _damage(path, 1, 2, how)
    run = open_run(path)
    snap = SnapshotStatistic(run)
    pairs = _Pairs(run)
    res = scan(run, {"snapshots": snap, "test-pairs": pairs}, workers=2, direct=direct)
    assert [(f.kind, f.ref.key, f.ref.replica, f.ref.start) for f in res.faults] == [
        (kind, "mass/c/1/2/0", 1, 20)
    ]
    out = res.results["snapshots"]
    assert not out.valid[1, 20:30].any() and out.valid[1, :20].all() and out.valid[0].all()
    assert out.n_sentinel == 0  # the missing chunk was not read as fill values
    seen = res.results["test-pairs"]
    assert (1, 20) not in seen and (1, 30) not in seen and (1, 31) in seen
    assert res.chunks_read == 7


class _Boom(Statistic):
    name = "test-boom"

    def chunk(self, chunk):
        if chunk.start >= 20:
            raise RuntimeError("kaboom\nsecond line")
        return None

    def merge(self, ref, partial):
        pass

    def finish(self, faults):
        return "done"


def test_statistic_that_raises_is_dropped_alone(tmp_path) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", snapshots=40))
    res = scan(run, {"boom": _Boom(run), "snap": SnapshotStatistic(run)}, workers=2)
    assert res.errors == {"boom": "RuntimeError: kaboom"}
    assert set(res.results) == {"snap"}  # results and errors by the caller's keys
    assert res.results["snap"].valid.all()


def test_results_come_back_by_key_for_one_class_twice(tmp_path) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", replicas=2, snapshots=30, chunk=10))
    res = scan(
        run,
        {("histogram", 4): HistogramStatistic(run, bins=4), 16: HistogramStatistic(run, bins=16)},
        workers=2,
    )
    assert res.results[("histogram", 4)].counts.shape[2] == 4
    assert res.results[16].counts.shape[2] == 16
    # each counts every (replica, snapshot, site) once: 2 x 30 x 16 (by definition)
    assert res.results[16].counts.sum() == res.results[("histogram", 4)].counts.sum() == 960


class _Concurrency(Statistic):
    """Counts chunks decoded but not yet merged (what the engine holds in memory)."""

    name = "test-concurrency"

    def __init__(self, run, **options):
        super().__init__(run, **options)
        self.lock = threading.Lock()
        self.started = self.merged = self.peak = 0

    def chunk(self, chunk):
        with self.lock:
            self.started += 1
            self.peak = max(self.peak, self.started - self.merged)
        time.sleep(0.003)

    def merge(self, ref, partial):
        with self.lock:
            self.merged += 1

    def finish(self, faults):
        return self.peak


def test_chunks_in_flight_are_bounded_and_progress_is_reported(tmp_path) -> None:
    run = open_run(write_run(tmp_path / "r.zarr", replicas=4, snapshots=100, chunk=5))
    calls = []
    res = scan(
        run,
        {"test-concurrency": _Concurrency(run)},
        workers=3,
        in_flight=3,
        progress=lambda d, t, _u: calls.append((d, t)),
    )
    assert 1 <= res.results["test-concurrency"] <= 3
    n = len(run.chunk_refs())
    assert calls == [(i, n) for i in range(1, n + 1)]


def test_snapshots_and_histogram_share_one_loop_per_chunk(tmp_path, monkeypatch) -> None:
    from massarc.archive.stats import _kernels

    calls = []
    real = _kernels.reduce_rows

    def counting(x, start, plan, **kw):
        calls.append(start)
        return real(x, start, plan, **kw)

    monkeypatch.setattr(_kernels, "reduce_rows", counting)
    run = open_run(write_run(tmp_path / "r.zarr", replicas=2, snapshots=30, chunk=10))
    stats = {"snapshots": SnapshotStatistic(run), "histogram": HistogramStatistic(run, bins=16)}
    res = scan(run, stats, workers=2)
    assert len(calls) == len(run.chunk_refs()) == 6
    assert res.results["histogram"].counts.sum() == 2 * 30 * 16
