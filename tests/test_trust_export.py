"""Issue 11, defect 2: an export never writes the fill value as data. A missing or corrupt
chunk makes ``convert`` fail with one line naming the chunk (exit status 2), whatever the
output format, and leaves no output behind."""

from __future__ import annotations

from pathlib import Path

import pytest
from _audit_runs import chunk_file, write_run
from click.testing import CliRunner

from massarc.cli import cli


@pytest.fixture
def run(tmp_path: Path) -> Path:
    return write_run(tmp_path / "run.zarr", replicas=3, snapshots=60, chunk=20)


def _convert(src: Path, dst: Path):
    return CliRunner().invoke(cli, ["convert", str(src), str(dst)], catch_exceptions=False)


def _one_line(res) -> str:
    assert res.exit_code == 2, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("massarc convert: error: "), res.stderr
    return lines[0]


@pytest.mark.parametrize("suffix", [".npz", ".txt", ".npy", ".h5", ".csv", ".nc"])
def test_missing_chunk_fails_the_export(run: Path, tmp_path: Path, suffix: str) -> None:
    chunk_file(run, 1, 2).unlink()
    out = tmp_path / f"out{suffix}"
    line = _one_line(_convert(run, out))
    assert "mass/c/1/2/0" in line and "missing" in line
    assert "replica 1, snapshots 40..59" in line
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run.zarr"]


@pytest.mark.parametrize("suffix", [".npz", ".txt", ".zarr", ".nc"])
def test_corrupt_chunk_fails_without_a_traceback(run: Path, tmp_path: Path, suffix: str) -> None:
    target = chunk_file(run, 2, 0)
    raw = bytearray(target.read_bytes())
    raw[len(raw) // 2] ^= 0xFF  # one flipped byte: the crc32c codec of zarr rejects it
    target.write_bytes(bytes(raw))
    out = tmp_path / f"out{suffix}"
    line = _one_line(_convert(run, out))
    assert "mass/c/2/0/0" in line and "corrupt" in line and "checksum" in line
    assert not out.exists()


def test_whole_run_still_exports(run: Path, tmp_path: Path) -> None:
    res = _convert(run, tmp_path / "out.npz")
    assert res.exit_code == 0, res.output
