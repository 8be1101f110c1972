"""``massarc summarize`` and the Python API: one table across a sweep, JSON, exports, the
stored observables read back (xarray objects when xarray is installed), and bad input
refused with one line and exit status 2 before anything is written."""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from conftest import make_meta, multinomial_run

import massarc
from massarc.archive import create_run, open_run
from massarc.cli import cli

SAMPLES = Path(__file__).resolve().parents[1] / "samples"
QUICK = ["--set", "probes=4", "--set", "resamples=19", "--quiet"]


@pytest.fixture
def sweep(tmp_path: Path) -> Path:
    """A small sweep: the two honest samples, copied."""
    root = tmp_path / "sweep"
    root.mkdir()
    for name in ("depot-ring.zarr", "dune-strip.zarr"):
        shutil.copytree(SAMPLES / name, root / name)
    return root


def _invoke(*args: str):
    return CliRunner().invoke(cli, ["summarize", *args], catch_exceptions=False)


def test_one_table_across_a_sweep_and_json(sweep):
    out = _invoke(str(sweep), *QUICK)
    assert out.exit_code == 0, out.output
    lines = out.output.splitlines()
    assert "cond. frac" in lines[0] and "m_typ ~ t^a" in lines[0] and "1/z" in lines[0]
    assert any("zrp driven b=4" in line for line in lines)
    assert any("cmam sym. w=1" in line for line in lines)
    assert "2 summarised, 0 already up to date" in out.output
    again = _invoke(str(sweep), *QUICK, "--as", "json")
    doc = json.loads(again.output)
    assert [r["row"]["computed"] for r in doc["runs"]] == [False, False]
    dune = next(r for r in doc["runs"] if "dune" in r["path"])
    assert dune["row"]["parameter"] == "w=1" and dune["row"]["sites"] == "64"
    assert dune["row"]["expected_fraction"] == pytest.approx(1 - (2**0.5 - 1) / 2)
    assert dune["exponents"]["typical_mass"]["expected"] == pytest.approx(0.5)
    assert "largest_mass_var" in dune["arrays"]


def test_exports_for_plotting_elsewhere(sweep, tmp_path):
    out = _invoke(str(sweep / "dune-strip.zarr"), *QUICK, "--export", "csv", str(tmp_path / "c"))
    assert out.exit_code == 0, out.output
    rows = list(csv.DictReader((tmp_path / "c" / "dune-strip" / "largest_mass_var.csv").open()))
    s = open_run(sweep / "dune-strip.zarr").summaries
    assert len(rows) == 512 and list(rows[0]) == ["snapshot", "time", "value"]
    assert float(rows[-1]["value"]) == pytest.approx(s.array("largest_mass_var")[-1])
    assert float(rows[-1]["time"]) == pytest.approx(open_run(sweep / "dune-strip.zarr").times[-1])
    table = list(csv.DictReader((tmp_path / "c" / "runs.csv").open()))
    assert table[0]["family"] == "cmam"
    out = _invoke(str(sweep / "dune-strip.zarr"), *QUICK, "--export", "json", str(tmp_path / "j"))
    doc = json.loads((tmp_path / "j" / "dune-strip.json").read_text())
    assert doc["arrays"]["correlation"]["dims"] == ["probe", "r"]
    assert np.asarray(doc["arrays"]["correlation"]["values"]).shape == (4, 64)


def _incomplete(path: Path) -> Path:
    w = create_run(path, make_meta("zrp", sites=(8,), b=4.0))
    w.append(np.arange(5.0), multinomial_run(2, 5, (8,), mass=10))
    w.close(complete=False)
    return path


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--set", "probes=1"], "option probes: expected an integer >= 2; got 1"),
        (["--set", "colour=red"], "option 'colour': expected one of probes,"),
        (["--set", "window=middle"], "option window: expected one of stationary, last-half"),
        (["--as", "yaml"], "Invalid value for '--as'"),
    ],
)
def test_bad_options_are_one_line_errors(sweep, args, message):
    out = CliRunner().invoke(cli, ["summarize", str(sweep), *args])
    assert out.exit_code == 2
    lines = out.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("massarc summarize: error: ")
    assert message in lines[0]
    assert not (sweep / "dune-strip.zarr" / "summaries").exists()


def test_a_run_being_written_stops_the_sweep_before_anything_is_written(sweep):
    _incomplete(sweep / "z-open.zarr")
    out = CliRunner().invoke(cli, ["summarize", str(sweep), *QUICK])
    assert out.exit_code == 2
    assert out.output.strip() == (
        f"massarc summarize: error: {sweep / 'z-open.zarr'}: the run is being written "
        "(state.complete is false); summarize it once its writer has finished"
    )
    assert not any(
        (sweep / n / "summaries").exists() for n in ("depot-ring.zarr", "dune-strip.zarr")
    )


def test_not_a_run_is_one_line_error(tmp_path):
    (tmp_path / "empty").mkdir()
    out = CliRunner().invoke(cli, ["summarize", str(tmp_path / "empty")])
    assert out.exit_code == 2 and "holds no massarc run" in out.output


def test_python_api_returns_the_stored_observables_with_provenance(sweep):
    [done] = massarc.summarize(sweep / "dune-strip.zarr", {"probes": 4, "resamples": 19})
    s = massarc.open_run(sweep / "dune-strip.zarr").summaries
    assert s.provenance["window"]["rule"] in ("stationary", "last-half")
    arr = s.array("typical_mass_mean")
    assert isinstance(arr, np.ndarray) and arr.shape == (512,)
    xr = pytest.importorskip("xarray")
    da = s["largest_mass"]
    assert isinstance(da, xr.DataArray) and da.dims == ("replica", "time")
    assert da.attrs["units"] == "mass" and "options" in da.attrs
    np.testing.assert_array_equal(da["time"].values, open_run(sweep / "dune-strip.zarr").times)
    ds = s.to_xarray()
    assert ds["correlation"].dims == ("probe", "r") and ds.attrs["format"] == "massarc-summaries"
    assert done.findings["exponents"]["typical_mass"]["exponent"] == pytest.approx(
        s.attrs("typical_mass_mean")["growth"]["exponent"]
    )


def test_info_mentions_stored_summaries(sweep):
    path = sweep / "dune-strip.zarr"
    assert "summaries" not in _info(path)
    _invoke(str(path), *QUICK)
    line = next(x for x in _info(path).splitlines() if x.strip().startswith("summaries"))
    assert "18 arrays by massarc" in line and "window" in line


def _info(path: Path) -> str:
    return CliRunner().invoke(cli, ["info", str(path)], catch_exceptions=False).output
