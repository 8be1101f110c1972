"""Crash consistency of the commands that write archives (issue 11, "must show": kill tests),
extending tests/test_crash.py (the writer API, 20 kills) to ``convert`` into an archive,
``sample`` and ``ingest`` fed by a steady producer through a pipe: 20 SIGKILLs each, at
random moments of an uninterrupted run's duration.

After every kill the archive reopens as a consistent committed prefix: every committed
snapshot equals the source (the input file; for ``sample`` the uninterrupted run with the
same seed, the sampler being deterministic), and nothing half-written looks complete.
``ingest`` supports resume: after each kill ``--resume`` with the whole stream completes
it, equal to the source. ``convert`` writes under a temporary name and renames at the end:
the destination is either absent or whole; a temporary left by the kill is an incomplete
run whose committed prefix equals the source.

Each child imports massarc before it is told to start, so that the kill moment falls in
the writing, not in the interpreter's start-up; the next child starts while the previous
one is examined.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import numpy as np
import pytest
from _audit_runs import write_text_stream
from conftest import make_meta, multinomial_run

from massarc.archive import open_run
from massarc.archive.formats.ingest import ingest

KILLS = 20

#: argv: go-file, then the massarc command line. Imports first, says "ready", waits for
#: the go-file, then runs the command as the console script would.
CHILD = r"""
import importlib, os, sys, time
from massarc.cli import cli
importlib.import_module(f"massarc.cli.{sys.argv[2]}")  # the command's imports
from massarc.archive.formats.registry import available_formats
available_formats()  # every format module loaded (h5py, netCDF4, ...)
if sys.argv[2] == "sample":  # the sampler's kernels loaded (numba) on a tiny run in memory
    from massarc.schema import parse_metadata
    from massarc.simulate import simulate
    tiny = parse_metadata({"model": {"family": "zrp", "b": 4.0, "drift": "asymmetric"},
                           "lattice": {"sites": [8], "boundary": "periodic"},
                           "run": {"regime": "transient"}})
    simulate(tiny, [0.0, 1.0], replicas=1, seed=1, mass=8)
go = sys.argv[1]
print("ready", flush=True)
while not os.path.exists(go):
    time.sleep(0.002)
cli.main(args=sys.argv[2:], prog_name="massarc")
"""

#: Prints the lines of a file at a steady pace (argv: file, seconds between lines).
PRODUCER = r"""
import sys, time
out = sys.stdout.buffer
for line in open(sys.argv[1], "rb"):
    out.write(line); out.flush(); time.sleep(float(sys.argv[2]))
"""


class Child:
    """A massarc command started and imported, waiting for its go."""

    def __init__(self, tmp: Path, k: int, args: list[str], stdin=None) -> None:
        self.go = tmp / f"go-{k}"
        self.proc = subprocess.Popen(
            [sys.executable, "-c", CHILD, str(self.go), *args],
            stdin=stdin,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        assert self.proc.stdout is not None

    def start(self) -> float:
        assert self.proc.stdout is not None
        assert self.proc.stdout.readline().strip() == "ready", self.proc.stderr
        self.go.touch()
        return time.monotonic()

    def _begun(self, begun: Callable[[], bool]) -> float:
        """Wait until ``begun()`` (the archive exists) or the end; return the moment."""
        while not begun() and self.proc.poll() is None:
            time.sleep(0.001)
        return time.monotonic()

    def finish(self, begun: Callable[[], bool], done: Callable[[], bool]) -> float:
        """Run to the end; the seconds from ``begun()`` to ``done()`` (the writing, without
        the interpreter's exit)."""
        self.start()
        since = self._begun(begun)
        while not done() and self.proc.poll() is None:
            time.sleep(0.001)
        took = time.monotonic() - since
        assert self.proc.wait(timeout=300) == 0, self.proc.stderr
        return took

    def kill_after(self, delay: float, begun: Callable[[], bool]) -> bool:
        """Kill ``delay`` seconds after ``begun()``; True if it was still running then."""
        self.start()
        since = self._begun(begun)
        while time.monotonic() - since < delay and self.proc.poll() is None:
            time.sleep(0.001)
        alive = self.proc.poll() is None
        self.proc.send_signal(signal.SIGKILL)
        self.proc.wait(timeout=60)
        return alive


def _exists(pattern: Path) -> Callable[[], bool]:
    return lambda: any(pattern.parent.glob(pattern.name))


def _complete(path: Path) -> Callable[[], bool]:
    """True once the header of ``path`` says the run is complete."""

    def done() -> bool:
        try:
            doc = json.loads((path / "zarr.json").read_text())
            return bool(doc["attributes"]["massarc"]["state"]["complete"])
        except (OSError, ValueError, KeyError):
            return False

    return done


def _children(tmp: Path, make: Callable[[int], list[str]]) -> Iterator[tuple[int, Child]]:
    """Child k, with child k + 1 already importing while k runs and is examined."""
    nxt = Child(tmp, 0, make(0))
    for k in range(KILLS):
        cur = nxt
        if k + 1 < KILLS:
            nxt = Child(tmp, k + 1, make(k + 1))
        yield k, cur


def _prefix(path: Path, mass: np.ndarray, times: np.ndarray) -> tuple[int, bool]:
    """(committed snapshots, complete) of ``path``, after checking every committed
    snapshot equals the source."""
    run = open_run(path)
    n_rep, n = run.n_replicas, run.n_snapshots
    assert np.array_equal(run.times, times[:n])
    got = np.stack([run.read(r) for r in range(n_rep)]) if n_rep else np.empty((0,))
    assert np.array_equal(got, mass[:n_rep, :n]) if n_rep else True
    if run.complete:
        assert run.shape == mass.shape
    return n * n_rep, run.complete


def _meta_file(tmp: Path, sites: int) -> Path:
    meta = tmp / "meta.json"
    meta.write_text(make_meta(sites=(sites,)).model_dump_json(exclude_none=True))
    return meta


def test_convert_into_an_archive_killed_at_random(tmp_path: Path) -> None:
    rng = np.random.default_rng(31)
    # 2 replicas x 2048 snapshots x 1024 sites (uint16): two 4 MiB chunks, written before
    # the one commit of this batch (an .npz member is one batch)
    mass = multinomial_run(2, 2048, (1024,), 40000, seed=5).astype(np.uint16)
    times = np.arange(2048) * 0.5
    src = tmp_path / "source.npz"
    np.savez(src, mass=mass, time=times)
    meta = _meta_file(tmp_path, 1024)

    def args(k: int) -> list[str]:
        return ["convert", str(src), str(tmp_path / f"out-{k}.zarr"), "--meta", str(meta), "-q"]

    whole = ["convert", str(src), str(tmp_path / "whole.zarr"), "--meta", str(meta), "-q"]
    full = Child(tmp_path, -1, whole).finish(
        _exists(tmp_path / "whole.zarr.partial-*"), (tmp_path / "whole.zarr").exists
    )
    assert _prefix(tmp_path / "whole.zarr", mass, times) == (4096, True)
    assert open_run(tmp_path / "whole.zarr").chunk_snapshots == 2048
    mid_write = 0  # kills that left the temporary archive begun, before the rename
    for k, child in _children(tmp_path, args):
        dst = tmp_path / f"out-{k}.zarr"
        alive = child.kill_after(
            float(rng.uniform(0.0, full)), _exists(dst.with_name(f"{dst.name}.partial-*"))
        )
        if dst.exists():  # renamed into place: whole
            assert _prefix(dst, mass, times)[1]
        leftovers = sorted(tmp_path.glob(f"out-{k}.zarr.partial-*"))
        assert len(leftovers) <= 1
        for tmp in leftovers:
            assert not dst.exists()
            if (tmp / "zarr.json").exists():
                committed, complete = _prefix(tmp, mass, times)
                if complete:  # killed between the last commit and the rename: the run is
                    assert committed == 4096  # whole (every value checked), only unplaced
                else:
                    mid_write += 1
        assert alive or dst.exists()
    assert mid_write >= 5, "kills should land while the archive is being written"
    again = Child(tmp_path, -2, [*args(0)[:3], "--meta", str(meta), "-q", "--overwrite"])
    again.finish(lambda: True, lambda: True)  # the same command again replaces what was left
    assert _prefix(tmp_path / "out-0.zarr", mass, times)[1]


SAMPLE_META = """\
[model]
family = "zrp"
b = 4.0
drift = "asymmetric"
[lattice]
sites = [512]
boundary = "periodic"
[run]
regime = "transient"
"""


def test_sample_killed_at_random(tmp_path: Path) -> None:
    rng = np.random.default_rng(32)
    meta = tmp_path / "meta.toml"
    meta.write_text(SAMPLE_META)

    def args(k: int) -> list[str]:
        out = tmp_path / ("reference.zarr" if k < 0 else f"run-{k}.zarr")
        return ["sample", str(out), "--meta", str(meta), "--density", "1.5", "--replicas",
                "2", "--seed", "7", "--t-max", "2", "--snapshots", "8192", "--quiet"]  # fmt: skip

    reference = tmp_path / "reference.zarr"
    full = Child(tmp_path, -1, args(-1)).finish(
        _exists(reference / "zarr.json"), _complete(reference)
    )
    ref = open_run(tmp_path / "reference.zarr")
    assert ref.complete and ref.chunk_snapshots < ref.n_snapshots  # several commits
    mass = np.stack([ref.read(r) for r in range(ref.n_replicas)])
    times = ref.times
    mid_write = 0
    for k, child in _children(tmp_path, args):
        out = tmp_path / f"run-{k}.zarr"
        child.kill_after(float(rng.uniform(0.0, full)), _exists(out / "zarr.json"))
        if not (out / "zarr.json").exists():
            continue  # killed before the run was begun: nothing to read
        mid_write += not _prefix(out, mass, times)[1]
    assert mid_write >= 5, "kills should land while the sampler is writing"


def test_ingest_from_a_steady_producer_killed_at_random_then_resumed(tmp_path: Path) -> None:
    rng = np.random.default_rng(33)
    mass = multinomial_run(5, 60, (24,), 60, seed=8)  # a commit at each replica boundary
    times = np.arange(60) * 0.25
    stream = tmp_path / "stream.txt"
    write_text_stream(stream, mass, times)
    meta = _meta_file(tmp_path, 24)
    delay = "0.004"  # steady: never idle for the 50 ms grace, so commits come by the clock
    producers: list[subprocess.Popen[bytes]] = []

    def start(out: Path, k: int) -> Child:
        producer = subprocess.Popen(
            [sys.executable, "-c", PRODUCER, str(stream), delay], stdout=subprocess.PIPE
        )
        producers.append(producer)
        args = ["ingest", "-", str(out), "--meta", str(meta), "-q"]
        child = Child(tmp_path, k, args, stdin=producer.stdout)
        assert producer.stdout is not None
        producer.stdout.close()
        return child

    whole = tmp_path / "whole.zarr"
    full = start(whole, -1).finish(_exists(whole / "zarr.json"), _complete(whole))
    assert _prefix(tmp_path / "whole.zarr", mass, times)[1]
    committed_before_kill = 0
    try:
        nxt = start(tmp_path / "live-0.zarr", 0)
        for k in range(KILLS):
            cur = nxt
            if k + 1 < KILLS:
                nxt = start(tmp_path / f"live-{k + 1}.zarr", k + 1)
            dst = tmp_path / f"live-{k}.zarr"
            cur.kill_after(float(rng.uniform(0.0, full)), _exists(dst / "zarr.json"))
            if (dst / "zarr.json").exists():
                n, complete = _prefix(dst, mass, times)
                committed_before_kill += n > 0 and not complete
            with open(stream, "rb") as f:  # resume with the whole stream again
                report = ingest(f, dst, meta=meta, resume=True)
            assert report.complete
            assert _prefix(dst, mass, times) == (mass.size // 24, True)
    finally:
        for p in producers:
            p.kill()
            p.wait(timeout=30)
    assert committed_before_kill >= 2, "some kills should land after a commit, before the end"


@pytest.mark.parametrize("seed", [41])
def test_a_reader_polling_while_a_writer_appends_sees_only_committed_data(
    tmp_path: Path, seed: int
) -> None:
    """A reader opening the run again and again while a writer process appends sees a
    growing committed prefix, never more than the marker, every value equal to the
    source (FORMAT.md, 3: readers truncate to the commit marker)."""
    R, T, L = 3, 400, 32
    mass = multinomial_run(R, T, (L,), 90, seed=seed)
    times = np.arange(T) * 0.5
    src = tmp_path / "source.npy"
    np.save(src, mass)
    writer = r"""
import sys, numpy as np
sys.path.insert(0, sys.argv[3])
from conftest import make_meta
from massarc.archive import create_run
mass = np.load(sys.argv[1]); times = np.arange(mass.shape[1]) * 0.5
w = create_run(sys.argv[2], make_meta(sites=(mass.shape[2],)), snapshots_hint=8)
for s in range(0, mass.shape[1], 4):
    w.append(times[s:s + 4], mass[:, s:s + 4]); w.flush()
w.close()
"""
    path = tmp_path / "growing.zarr"
    tests = str(Path(__file__).parent)
    proc = subprocess.Popen([sys.executable, "-c", writer, str(src), str(path), tests])
    seen: list[int] = []
    try:
        while True:
            done = proc.poll() is not None
            if (path / "zarr.json").exists():
                try:
                    run = open_run(path)
                except Exception as exc:  # the header of a run being created
                    raise AssertionError(f"reader failed while the writer appends: {exc}") from exc
                n = run.n_snapshots
                if n > 0:  # before the first commit the arrays may not exist yet
                    got = np.asarray(run.mass[: run.n_replicas, :n])
                    assert got.shape[:2] == (run.n_replicas, n)
                    np.testing.assert_array_equal(got, mass[: run.n_replicas, :n])
                    np.testing.assert_array_equal(run.times, times[:n])
                seen.append(n)
            if done:
                break
    finally:
        proc.wait(timeout=120)
    assert proc.returncode == 0
    assert seen == sorted(seen) and seen[-1] == T  # never shrinks; ends whole
    assert len(set(seen)) >= 5, "the reader should have seen the run grow"
    assert os.path.exists(path)
