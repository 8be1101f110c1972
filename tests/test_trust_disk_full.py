"""Issue 11, "faults while writing": a full disk. Nothing committed is lost (the run
reopens as the committed prefix, incomplete, and resumes once there is room), nothing
half-written is left looking complete, and the error is one line naming the run and
saying "no space left on device" (exit status 2), for the writer API, ``convert`` into an
archive and ``ingest``.

Two ways to fill the disk: a store wrapper that lets zarr's local store write a set
number of bytes and then raises ``OSError(ENOSPC)`` as the kernel would (always runs),
and a real 1 MiB tmpfs (needs the right to mount, so it is skipped where the machine
refuses it). The source data are the outside truth: every committed snapshot must equal
them.
"""

from __future__ import annotations

import errno
import os
import subprocess
import threading
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
import zarr.storage._local as zarr_local
from _audit_runs import write_text_stream
from click.testing import CliRunner
from conftest import make_meta, multinomial_run

from massarc.archive import WriteError, create_run, open_run, resume_run
from massarc.cli import cli

R, T, L, MASS, STEP = 3, 96, 32, 5000, 8


class Disk:
    """Room left on the simulated disk, in bytes (None: unlimited)."""

    def __init__(self) -> None:
        self.room: int | None = None
        self.written = 0
        self.lock = threading.Lock()


@pytest.fixture
def disk(monkeypatch: pytest.MonkeyPatch) -> Disk:
    """zarr's local store writes through ``_put``; this one refuses a write that does not
    fit in the room left, before any byte of it lands (the atomic write of zarr removes
    its temporary file on a failed write anyway)."""
    state = Disk()
    real = zarr_local._put

    def put(path: Path, value, exclusive: bool = False) -> int:
        n = memoryview(value.as_buffer_like()).nbytes
        with state.lock:
            if state.room is not None:
                if n > state.room:
                    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
                state.room -= n
            state.written += n
        return real(path, value, exclusive=exclusive)

    monkeypatch.setattr(zarr_local, "_put", put)
    return state


def _data() -> tuple[np.ndarray, np.ndarray]:
    return multinomial_run(R, T, (L,), MASS, seed=11), np.arange(T) * 0.5


def _write(path: Path, data: np.ndarray, times: np.ndarray) -> None:
    with create_run(path, make_meta(sites=(L,)), snapshots_hint=STEP) as w:
        for s in range(0, T, STEP):
            w.append(times[s : s + STEP], data[:, s : s + STEP])
            w.flush()


def _prefix_is_exact(path: Path, data: np.ndarray, times: np.ndarray) -> int:
    run = open_run(path)
    assert not run.complete
    n_rep, n = run.n_replicas, run.n_snapshots
    assert np.array_equal(run.times, times[:n])
    assert np.array_equal(np.asarray(run.mass[:n_rep, :n]), data[:n_rep, :n])
    assert not list(path.rglob("*.partial"))
    return n


@pytest.mark.parametrize("fraction", [0.2, 0.5, 0.9])
def test_writer_keeps_the_committed_prefix_and_resumes(
    tmp_path: Path, disk: Disk, fraction: float
) -> None:
    data, times = _data()
    _write(tmp_path / "sized.zarr", data, times)  # how many bytes the whole run takes
    disk.room = int(disk.written * fraction)
    path = tmp_path / "run.zarr"
    with pytest.raises(WriteError) as err:
        _write(path, data, times)
    message = str(err.value)
    assert message.startswith(f"{path}: no space left on device;") and "\n" not in message
    assert err.value.reason == "no space left on device" and err.value.errno == errno.ENOSPC
    n = _prefix_is_exact(path, data, times)
    assert 0 < n < T and f"keeps the {n} snapshots" in message
    disk.room = None  # room again: resume completes it
    with resume_run(path) as w:
        w.append(times[n:], data[:, n:])
    done = open_run(path)
    assert done.complete and np.array_equal(np.asarray(done.mass[:]), data)


def test_a_run_that_cannot_even_begin(tmp_path: Path, disk: Disk) -> None:
    disk.room = 10
    with pytest.raises(WriteError, match=r"no space left on device; the run was not begun"):
        create_run(tmp_path / "run.zarr", make_meta(sites=(L,)))


def _one_line(res, command: str) -> str:
    assert res.exit_code == 2, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"massarc {command}: error: "), res.stderr
    return lines[0]


def test_convert_into_an_archive_leaves_nothing(tmp_path: Path, disk: Disk) -> None:
    data, times = _data()
    src = tmp_path / "in" / "run.npz"
    src.parent.mkdir()
    np.savez(src, mass=data, time=times)
    meta = tmp_path / "in" / "meta.json"
    meta.write_text(make_meta(sites=(L,)).model_dump_json(exclude_none=True))
    before = {p: p.read_bytes() for p in src.parent.iterdir()}
    out = tmp_path / "out"
    out.mkdir()
    args = ["convert", str(src), str(out / "run.zarr"), "--meta", str(meta), "-q"]
    assert CliRunner().invoke(cli, args).exit_code == 0
    whole = disk.written
    for fraction in (0.3, 0.8):
        disk.room = int(whole * fraction)
        dst = out / f"run-{fraction}.zarr"
        args = ["convert", str(src), str(dst), "--meta", str(meta), "-q"]
        line = _one_line(CliRunner().invoke(cli, args), "convert")
        assert f"{dst}: no space left on device; nothing was written" in line
    assert sorted(p.name for p in out.iterdir()) == ["run.zarr"]  # no partial output
    assert {p: p.read_bytes() for p in src.parent.iterdir()} == before


def test_ingest_keeps_the_committed_prefix_and_resumes(tmp_path: Path, disk: Disk) -> None:
    data, times = _data()
    stream = tmp_path / "stream.txt"
    write_text_stream(stream, data, times)
    meta = tmp_path / "meta.json"
    meta.write_text(make_meta(sites=(L,)).model_dump_json(exclude_none=True))
    base = ["ingest", str(stream)]
    res = CliRunner().invoke(cli, [*base, str(tmp_path / "sized.zarr"), "--meta", str(meta)])
    assert res.exit_code == 0, res.output
    whole = disk.written
    dst = tmp_path / "live.zarr"
    disk.room = int(whole * 0.6)  # replicas are committed one by one: fails in the second
    line = _one_line(CliRunner().invoke(cli, [*base, str(dst), "--meta", str(meta)]), "ingest")
    assert f"{dst}: no space left on device;" in line
    run = open_run(dst)
    assert not run.complete and 1 <= run.n_replicas < R
    np.testing.assert_array_equal(np.asarray(run.mass[: run.n_replicas]), data[: run.n_replicas])
    disk.room = None
    res = CliRunner().invoke(cli, [*base, str(dst), "--meta", str(meta), "--resume", "-q"])
    assert res.exit_code == 0, res.output
    done = open_run(dst)
    assert done.complete and np.array_equal(np.asarray(done.mass[:]), data)


@pytest.fixture
def small_disk(tmp_path: Path) -> Iterator[Path]:
    """A real 1 MiB tmpfs. Mounting needs root and a kernel that lets this process mount
    (containers often refuse): that depends on the machine, not on the installed extras,
    so the tests using it skip where the mount is refused."""
    mnt = tmp_path / "small"
    mnt.mkdir()
    res = subprocess.run(
        ["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)],
        capture_output=True,
        text=True,
        check=False,
    )
    if res.returncode != 0:
        pytest.skip(f"this machine refuses to mount a tmpfs: {res.stderr.strip()}")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


def test_a_real_full_disk(tmp_path: Path, small_disk: Path) -> None:
    rng = np.random.default_rng(3)
    sites = 256
    data = rng.multinomial(10**6, np.full(sites, 1 / sites), size=(2, 1600))  # ~9 bits/value
    times = np.arange(1600) * 1.0
    meta = make_meta(sites=(sites,))
    path = small_disk / "run.zarr"
    w = create_run(path, meta, snapshots_hint=50)
    with pytest.raises(WriteError, match="no space left on device") as err:
        for s in range(0, 1600, 50):
            w.append(times[s : s + 50], data[:, s : s + 50])
            w.flush()
    n = open_run(path).n_snapshots
    assert 0 < n < 1600 and f"keeps the {n} snapshots" in str(err.value)
    run = open_run(path)
    assert not run.complete and np.array_equal(np.asarray(run.mass[:, :n]), data[:, :n])
    assert not list(path.rglob("*.partial"))
    # convert into the full disk: one line, and nothing left behind
    src = tmp_path / "run.npz"
    np.savez(src, mass=data, time=times)
    meta_file = tmp_path / "meta.json"
    meta_file.write_text(meta.model_dump_json(exclude_none=True))
    dst = small_disk / "converted.zarr"
    args = ["convert", str(src), str(dst), "--meta", str(meta_file), "-q"]
    line = _one_line(CliRunner().invoke(cli, args), "convert")
    assert f"{dst}: no space left on device; nothing was written" in line
    assert sorted(p.name for p in small_disk.iterdir()) == ["run.zarr"]
    # text export onto the full disk: the same
    out = small_disk / "run.txt"
    line = _one_line(CliRunner().invoke(cli, ["convert", str(src), str(out), "--meta",
                                              str(meta_file), "-q"]), "convert")  # fmt: skip
    assert f"{out}: no space left on device" in line
    assert sorted(p.name for p in small_disk.iterdir()) == ["run.zarr"]
