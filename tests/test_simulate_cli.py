"""``massarc sample``: writes a valid archive, records how it was made, and turns bad
input into one line on stderr with exit status 2 without touching anything."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import massarc
from massarc.cli import cli
from massarc.cli import sample as sample_cmd
from massarc.simulate import INITIAL_KINDS

# A scenario of our own: a ring of 120 cells in which grains hop out of a cell at rate
# 1 + 4/k (k grains present), biased towards +x.
META = """\
[model]
family = "zrp"
b = 4.0
drift = "asymmetric"
right_probability = 0.75
[lattice]
sites = [120]
boundary = "periodic"
[run]
regime = "transient"
"""


@pytest.fixture
def meta_file(tmp_path: Path) -> Path:
    path = tmp_path / "grains.toml"
    path.write_text(META)
    return path


def _sample(*args: str):
    return CliRunner().invoke(cli, ["sample", *args])


def test_sample_writes_a_readable_run(meta_file: Path, tmp_path: Path) -> None:
    out = tmp_path / "grains.zarr"
    args = [str(out), "--meta", str(meta_file), "--replicas", "3", "--seed", "12",
            "--t-max", "50", "--snapshots", "26", "--density", "1.5"]  # fmt: skip
    result = _sample(*args)
    assert result.exit_code == 0, result.output
    assert result.stderr == ""  # no progress bar when stderr is not a terminal
    run = massarc.open_run(out)
    assert run.complete and run.n_replicas == 3 and run.n_snapshots == 26
    assert run.times[0] == 0.0 and run.times[-1] == 50.0
    assert np.all(run.read(2).sum(axis=1) == 180)
    info = run.meta.run
    assert info.total_mass == 180 and info.initial.kind == "random" and len(info.seeds) == 3
    assert run.meta.simulator.command == "massarc sample " + " ".join(args)


def test_sample_overrides_and_exact_mode(meta_file: Path, tmp_path: Path) -> None:
    out = tmp_path / "exact.zarr"
    result = _sample(str(out), "--meta", str(meta_file), "--set", "lattice.sites=[40]",
                     "--set", "model.b=3.0", "--replicas", "2", "--seed", "1", "--t-max", "100",
                     "--snapshots", "8", "--spacing", "log", "--mass", "30", "--exact",
                     "--quiet")  # fmt: skip
    assert result.exit_code == 0, result.output
    run = massarc.open_run(out)
    assert run.sites == (40,) and run.meta.model.b == 3.0
    assert run.meta.run.sampling == "log" and run.meta.run.initial.kind == "steady-state"
    assert np.all(run.read(1).sum(axis=1) == 30)


def test_the_cli_offers_the_samplers_initial_conditions() -> None:
    assert sample_cmd._INITIAL_KINDS == INITIAL_KINDS


BAD = [
    (["--density", "0.31"], "--density: expected density x sites to be a whole number; got"
     " 0.31 x 120 = 37.2"),
    (["--mass", "5", "--density", "1.0"],
     "expected one of --mass and --density; got --mass 5 and --density 1.0"),
    ([], "expected --mass or --density (or run.total_mass in the metadata); got none"),
    (["--mass", "5", "--set", "lattice.boundary=open"],
     "lattice.open: expected injection and extraction rates for the open axes; got none"),
    (["--mass", "5", "--set", "lattice.boundary=reflecting", "--initial", "steady-state"],
     "expected periodic axes for a steady-state start"),
    (["--mass", "5", "--set", "model.family=cmam"], "model.diffusion: required key is missing"),
    (["--mass", "5", "--exact", "--initial", "random"], "expected no --initial with --exact"),
    (["--mass", "5", "--set", "model.b=-3"], "model.b: expected a finite value > -1"),
]  # fmt: skip


@pytest.mark.parametrize(("extra", "message"), BAD)
def test_bad_input_is_one_line_and_exit_2(
    extra: list[str], message: str, meta_file: Path, tmp_path: Path
) -> None:
    out = tmp_path / "bad.zarr"
    result = _sample(str(out), "--meta", str(meta_file), "--replicas", "2", "--seed", "0",
                     "--t-max", "10", "--snapshots", "5", *extra)  # fmt: skip
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("massarc sample: error: "), result.stderr
    assert message in lines[0]
    assert not out.exists()
    assert meta_file.read_text() == META


def test_metadata_errors_name_the_file(tmp_path: Path) -> None:
    missing = tmp_path / "nowhere.toml"
    result = _sample(str(tmp_path / "o.zarr"), "--meta", str(missing), "--replicas", "1",
                     "--seed", "0", "--t-max", "1", "--snapshots", "2", "--mass", "1")  # fmt: skip
    assert result.exit_code == 2 and str(missing) in result.stderr


def test_an_existing_archive_is_kept_unless_overwrite(meta_file: Path, tmp_path: Path) -> None:
    out = tmp_path / "kept.zarr"
    base = [str(out), "--meta", str(meta_file), "--replicas", "1", "--seed", "0",
            "--t-max", "5", "--snapshots", "3", "--mass", "10"]  # fmt: skip
    assert _sample(*base).exit_code == 0
    before = massarc.open_run(out).read(0)
    again = _sample(*base[:-1], "20")
    assert again.exit_code == 2 and "already exists (pass --overwrite" in again.stderr
    assert np.array_equal(massarc.open_run(out).read(0), before)
    assert _sample(*base[:-1], "20", "--overwrite").exit_code == 0
    assert massarc.open_run(out).meta.run.total_mass == 20


@pytest.mark.parametrize(
    "extra",
    [["--replicas", "0"], ["--t-max", "-1"], ["--spacing", "cubic"], ["--initial", "heaped"]],
)
def test_click_usage_errors_exit_2(extra: list[str], meta_file: Path, tmp_path: Path) -> None:
    args = {"--replicas": "1", "--t-max": "1"}
    args.update(dict(zip(extra[::2], extra[1::2], strict=True)))
    flat = [item for pair in args.items() for item in pair]
    result = _sample(str(tmp_path / "u.zarr"), "--meta", str(meta_file), "--seed", "0",
                     "--snapshots", "2", "--mass", "1", *flat)  # fmt: skip
    assert result.exit_code == 2
    assert not (tmp_path / "u.zarr").exists()
