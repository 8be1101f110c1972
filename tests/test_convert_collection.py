"""A collection converts like a run: every run of a sweep, one output each (common practice:
a command that takes a run also takes a collection)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
from click.testing import CliRunner
from conftest import make_meta, multinomial_run

from massarc.archive import create_run, open_run
from massarc.cli import cli


def _sweep(root: Path) -> dict[str, np.ndarray]:
    data = {}
    for i, rho in enumerate((1, 2)):
        x = multinomial_run(2, 6, (8,), mass=8 * rho, seed=i)
        with create_run(root / f"rho{rho}.zarr", make_meta(sites=(8,))) as w:
            w.append(np.arange(6, dtype=float), x)
        data[f"rho{rho}"] = x
    return data


def test_every_run_of_a_collection_is_converted_and_comes_back_exactly(tmp_path: Path) -> None:
    data = _sweep(tmp_path / "sweep")
    runner = CliRunner()
    res = runner.invoke(
        cli, ["convert", str(tmp_path / "sweep"), str(tmp_path / "out"), "--to", "text", "--quiet"]
    )
    assert res.exit_code == 0, res.output
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["rho1.txt", "rho2.txt"]
    for name, x in data.items():
        back = tmp_path / f"{name}.zarr"
        res = runner.invoke(cli, ["convert", str(tmp_path / "out" / f"{name}.txt"), str(back)])
        assert res.exit_code == 0, res.output
        assert np.array_equal(np.asarray(open_run(back).mass[:]), x)


def test_a_collection_needs_the_output_format(tmp_path: Path) -> None:
    _sweep(tmp_path / "sweep")
    res = CliRunner().invoke(cli, ["convert", str(tmp_path / "sweep"), str(tmp_path / "out")])
    assert res.exit_code == 2
    assert "collection of 2 runs" in res.output and "--to NAME" in res.output
    assert not (tmp_path / "out").exists()
