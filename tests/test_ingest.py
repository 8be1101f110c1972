"""``massarc ingest``: live archiving from a pipe survives kills of either side.

The simulator side is a small feeder process printing the text format line by line; the
archive after any kill followed by ``--resume`` with the whole stream again must equal the
archive of an uninterrupted run, snapshot for snapshot.
"""

from __future__ import annotations

import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from massarc.archive import DataError, open_run
from massarc.archive.formats.ingest import ingest

MASSARC = str(Path(sys.executable).with_name("massarc"))
META = """\
[model]
family = "cmam"
diffusion = 1.0
chipping = 0.25
[lattice]
sites = [4, 5]
boundary = "periodic"
[run]
regime = "transient"
"""
#: Prints the lines of a file one by one, like a simulator; argv: file, delay, the line it
#: stops in the middle of (-1: none), and a path: after the first snapshot it waits until
#: that path exists (the archive), so that the pipe does not fill before massarc starts.
FEEDER = r"""
import os, sys, time
path, delay, stop, gate = sys.argv[1], float(sys.argv[2]), int(sys.argv[3]), sys.argv[4]
out = sys.stdout.buffer
for i, line in enumerate(open(path, "rb")):
    if i == stop:
        out.write(line[: len(line) // 2]); out.flush(); time.sleep(60)
    out.write(line); out.flush()
    while i == 2 and not os.path.exists(gate):
        time.sleep(0.01)
    time.sleep(delay)
"""


def _stream(tmp: Path, replicas: int = 3, snapshots: int = 25) -> tuple[Path, np.ndarray]:
    rng = np.random.default_rng(9)
    mass = rng.multinomial(60, np.full(20, 1 / 20), size=(replicas, snapshots))
    times = np.cumsum(rng.exponential(0.3, snapshots))
    lines = ["# massarc-text 1\n"]
    for r in range(replicas):
        lines.append(f"# replica {r}\n")
        lines += [
            f"{t!r} " + " ".join(map(str, row)) + "\n"
            for t, row in zip(times.tolist(), mass[r].tolist(), strict=True)
        ]
    path = tmp / "stream.txt"
    path.write_text("".join(lines))
    return path, mass.reshape(replicas, snapshots, 4, 5)


def _state(dst: Path) -> dict:
    try:
        return json.loads((dst / "zarr.json").read_text())["attributes"]["massarc"]["state"]
    except (OSError, ValueError, KeyError):
        return {}


def _wait(dst: Path, ok, timeout: float = 60.0) -> dict:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        st = _state(dst)
        if st and ok(st):
            return st
        time.sleep(0.02)
    raise AssertionError(f"archive never reached the awaited state; last {_state(dst)}")


def _feed(stream: Path, dst: Path, delay: float, stop: int = -1) -> subprocess.Popen:
    args = [sys.executable, "-c", FEEDER, str(stream), str(delay), str(stop), str(dst)]
    return subprocess.Popen(args, stdout=subprocess.PIPE)


def _ingest(src, dst: Path, meta: Path, *extra: str, stdin=None) -> subprocess.Popen:
    return subprocess.Popen(
        [MASSARC, "ingest", str(src), str(dst), "--meta", str(meta), "-q", *extra],
        stdin=stdin,
        stderr=subprocess.PIPE,
        text=True,
    )


def _equal(dst: Path, mass: np.ndarray, times: np.ndarray | None = None) -> None:
    run = open_run(dst)
    assert run.complete
    assert run.shape == mass.shape
    got = np.stack([run.read(r) for r in range(run.n_replicas)])
    np.testing.assert_array_equal(got, mass)
    if times is not None:
        np.testing.assert_array_equal(run.times, times)


@pytest.fixture
def meta(tmp_path: Path) -> Path:
    path = tmp_path / "meta.toml"
    path.write_text(META)
    return path


def test_sigkill_of_massarc_then_resume_with_the_whole_stream(tmp_path, meta):
    stream, mass = _stream(tmp_path, snapshots=12)
    reference = tmp_path / "reference.zarr"
    with open(stream, "rb") as f:
        ingest(f, reference, meta=meta)
    dst = tmp_path / "live.zarr"
    # slower than the commit grace; then it holds half of line 21 (snapshot 6 of replica 1:
    # header, marker, 12 lines, marker, 6 lines), so that the kill lands inside replica 1
    # however loaded the machine is
    feeder = _feed(stream, dst, 0.08, stop=21)
    proc = _ingest("-", dst, meta, stdin=feeder.stdout)
    feeder.stdout.close()
    # kill inside replica 1, after some of it is committed
    _wait(dst, lambda st: st.get("replicas", 0) >= 1 and (st.get("open_replica") or 0) >= 4)
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    feeder.kill()
    feeder.wait(timeout=30)
    partial = open_run(dst)
    assert not partial.complete and partial.n_replicas == 1
    np.testing.assert_array_equal(partial.read(0), mass[0])  # the committed prefix is exact
    again = _ingest(stream, dst, meta, "--resume")
    assert again.wait(timeout=120) == 0, again.stderr.read()
    _equal(dst, mass, open_run(reference).times)
    assert open_run(dst).meta == open_run(reference).meta
    # resuming a finished archive with the same stream adds nothing
    third = _ingest(stream, dst, meta, "--resume")
    assert third.wait(timeout=120) == 0
    _equal(dst, mass)


def test_feeder_killed_mid_line_leaves_that_line_out(tmp_path, meta):
    stream, mass = _stream(tmp_path, replicas=2, snapshots=20)
    dst = tmp_path / "live.zarr"
    # lines: magic, "# replica 0", 20 snapshots: stop inside snapshot 15 of replica 0
    feeder = _feed(stream, dst, 0.002, stop=2 + 15)
    proc = _ingest("-", dst, meta, stdin=feeder.stdout)
    feeder.stdout.close()
    _wait(dst, lambda st: st.get("snapshots", 0) >= 15)
    time.sleep(0.3)  # the half line is in the pipe by now
    feeder.send_signal(signal.SIGKILL)
    feeder.wait(timeout=30)
    assert proc.wait(timeout=60) == 2
    err = proc.stderr.read()
    assert "line 18: the input ended inside this line" in err and "--resume" in err
    run = open_run(dst)
    assert not run.complete and run.n_snapshots == 15  # the partial snapshot is not there
    np.testing.assert_array_equal(run.read(0), mass[0, :15])
    again = _ingest(stream, dst, meta, "--resume")
    assert again.wait(timeout=120) == 0, again.stderr.read()
    _equal(dst, mass)


def test_incomplete_last_replica_and_refusals(tmp_path, meta):
    stream, mass = _stream(tmp_path, replicas=2, snapshots=6)
    text = stream.read_text().splitlines(keepends=True)
    short = tmp_path / "short.txt"
    short.write_text("".join(text[:-2]))  # replica 1 loses two snapshots
    dst = tmp_path / "a.zarr"
    proc = _ingest(short, dst, meta)
    assert proc.wait(timeout=60) == 2
    assert "replica 1 has 4 of 6 snapshots; the archive stays incomplete" in proc.stderr.read()
    assert not open_run(dst).complete and open_run(dst).n_replicas == 1
    proc = _ingest(stream, dst, meta)  # exists, no --resume
    assert proc.wait(timeout=60) == 2 and "pass --resume" in proc.stderr.read()
    other = tmp_path / "other.toml"
    other.write_text(META.replace("[4, 5]", "[5, 4]"))
    proc = _ingest(stream, dst, other, "--resume")
    assert proc.wait(timeout=60) == 2 and "lattice: expected the lattice" in proc.stderr.read()
    wrong = tmp_path / "wrong.txt"
    wrong.write_text(stream.read_text().replace(text[3], "99.0" + text[3][text[3].index(" ") :]))
    proc = _ingest(wrong, dst, meta, "--resume")
    assert proc.wait(timeout=60) == 2
    assert "in the input but" in proc.stderr.read()
    proc = _ingest(stream, dst, meta, "--resume")
    assert proc.wait(timeout=60) == 0
    _equal(dst, mass)


def test_resume_of_an_archive_never_begun_starts_it(tmp_path, meta):
    stream, mass = _stream(tmp_path, replicas=2, snapshots=5)
    with open(stream, "rb") as f:
        report = ingest(f, tmp_path / "new.zarr", meta=meta, resume=True)
    assert report.complete and report.appended == 10 and report.skipped == 0
    _equal(tmp_path / "new.zarr", mass)


def test_a_refused_resume_changes_nothing(tmp_path, meta):
    # issue 11, defect 9: a wrong stream fed to `ingest --resume` of a finished archive was
    # refused, but left the archive marked incomplete
    stream, _ = _stream(tmp_path, replicas=2, snapshots=5)
    done = tmp_path / "done.zarr"
    with open(stream, "rb") as f:
        assert ingest(f, done, meta=meta).complete
    before = {p: p.read_bytes() for p in sorted(done.rglob("*")) if p.is_file()}
    wrong = tmp_path / "wrong.txt"
    wrong.write_text(
        stream.read_text().replace("# replica 0\n", "# replica 0\n0.0 " + "1 " * 19 + "2\n", 1)
    )
    with open(wrong, "rb") as f, pytest.raises(DataError) as err:
        ingest(f, done, meta=meta, resume=True)
    assert "in the archive being resumed; is this the same run?" in str(err.value)
    after = {p: p.read_bytes() for p in sorted(done.rglob("*")) if p.is_file()}
    assert after == before
    assert _state(done)["complete"] is True


def test_steady_input_is_committed_at_least_every_commit_interval(tmp_path, meta):
    # issue 11, defect 8: with a producer printing every 20 ms (never idle for the 50 ms
    # grace) nothing was committed after 5 s, and a kill lost everything received
    stream, _ = _stream(tmp_path, replicas=1, snapshots=400)  # 8 s of output at 20 ms
    dst = tmp_path / "steady.zarr"
    feeder = _feed(stream, dst, 0.02)
    proc = _ingest("-", dst, meta, stdin=feeder.stdout)
    feeder.stdout.close()
    try:
        # the producer waits after its first lines until the archive exists (massarc may
        # take long to start on a loaded machine); from then on it prints steadily
        _wait(dst, lambda st: True)
        st = _wait(dst, lambda st: st.get("snapshots", 0) >= 10, timeout=5.0)
        assert feeder.poll() is None, "the producer finished before anything was committed"
        assert not st.get("complete")
    finally:
        proc.kill()
        feeder.kill()
        proc.wait(timeout=30)
        feeder.wait(timeout=30)
