"""Issue 11, defect 5: a chunk must be a regular file of plausible size, inside the run.
A link to /dev/zero or out of the run, a sparse 5 GB file and a FIFO are refused before
anything is read, naming the file; ``check``, ``info`` and ``convert`` finish (no hang)
under an address-space cap (tests/_hostile.py)."""

from __future__ import annotations

import os
import shutil
from collections.abc import Callable
from pathlib import Path

import pytest
from _audit_runs import chunk_file, write_run
from _hostile import assert_refused_before_decoding

from massarc.archive import open_run


def _to_device(chunk: Path) -> None:
    chunk.unlink()
    chunk.symlink_to("/dev/zero")


def _outside(chunk: Path) -> None:
    outside = chunk.parents[5] / "outside.bin"  # next to run.zarr
    shutil.copy(chunk, outside)
    chunk.unlink()
    chunk.symlink_to(outside)


def _sparse(chunk: Path) -> None:
    with chunk.open("r+b") as f:
        f.truncate(5 << 30)  # 5 GiB, sparse: no disk used


def _fifo(chunk: Path) -> None:
    chunk.unlink()
    os.mkfifo(chunk)


CASES: dict[str, tuple[Callable[[Path], None], str]] = {
    "link-to-dev-zero": (_to_device, "mass/c/1/0/0: a symbolic link to /dev/zero, outside the run"),
    "link-out-of-the-run": (_outside, "outside.bin, outside the run"),
    "sparse-5-GB": (_sparse, "mass/c/1/0/0: 5368709120 bytes; expected at most"),
    "fifo": (_fifo, "mass/c/1/0/0: a FIFO, not a regular file"),
}


@pytest.mark.parametrize("case", list(CASES))
def test_unreadable_chunk_file_is_refused(tmp_path: Path, case: str) -> None:
    damage, message = CASES[case]
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=20, chunk=10)
    damage(chunk_file(run, 1, 0))
    assert_refused_before_decoding(run, tmp_path / "o.npz", message)


def test_link_inside_the_run_is_read(tmp_path: Path) -> None:
    run = write_run(tmp_path / "run.zarr", replicas=2, snapshots=20, chunk=10)
    before = open_run(run).read(1)
    chunk = chunk_file(run, 1, 0)
    twin = chunk.with_name("twin")
    chunk.rename(twin)
    chunk.symlink_to(twin.name)  # a relative link to a file of the run
    assert (open_run(run).read(1) == before).all()
    assert [c.mass.shape for c in open_run(run).chunks()]
