"""Sweeps: ``massarc check`` and ``massarc summarize`` over a collection give one table
across its parameters, saying which points are condensed, stationary and valid, as a
terminal table, JSON and CSV.

Outside truth: the critical densities rho_c = 1/(b - 2) for the ZRP with u(k) = 1 + b/k
(Evans and Hanney, J. Phys. A 38, R195, 2005) and sqrt(w/D + 1) - 1 for the CMAM
(Majumdar, Krishnamurthy and Barma, PRL 81, 3691, 1998); no condensate for b <= 2 (same
review). The sweep is exact steady-state samples of the reference sampler, so every point
is stationary from its first snapshot; one point has a planted conservation fault, so it
is the one invalid point.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path

import jsonschema
import pytest
from _sweep_runs import POINTS, write_sweep
from click.testing import CliRunner

from massarc.cli import cli
from massarc.schema import parse_metadata, sweep_point
from massarc.validators.report import SweepRow

QUICK = ["--set", "probes=4", "--set", "resamples=19", "--quiet"]
#: run -> (condensed by theory, rho, rho_c) for the points of _sweep_runs.POINTS on 40 sites
EXPECTED = {
    "b4-fluid": (False, 10 / 40, 1 / (4 - 2)),
    "b4-condensed": (True, 60 / 40, 1 / (4 - 2)),
    "b1.5-fluid": (False, 60 / 40, None),
}


@pytest.fixture(scope="module")
def sweep(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_sweep(tmp_path_factory.mktemp("sweep") / "sweep", unconserved="b4-fluid")


def _invoke(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def _name(path: str) -> str:
    return Path(path).name.removesuffix(".zarr")


def test_check_sweep_as_csv_json_and_table(sweep):
    out = _invoke("check", str(sweep), "--as", "csv", "--quiet")
    assert out.exit_code == 1  # the planted fault fails conservation
    rows = {_name(r["run"]): r for r in csv.DictReader(io.StringIO(out.stdout))}
    assert sorted(rows) == sorted(name for name, _, _ in POINTS)
    assert list(next(iter(rows.values()))) == list(SweepRow.model_fields)
    for name, (condensed, rho, rho_c) in EXPECTED.items():
        row = rows[name]
        assert row["condensed"] == str(condensed)
        assert float(row["density"]) == pytest.approx(rho)
        assert (row["critical_density"] or None) == (None if rho_c is None else str(rho_c))
        assert row["stationary"] == "pass" and row["window_start"] == "0"
        assert row["valid"] == ("fail" if name == "b4-fluid" else "pass")
        assert row["family"] == "zrp" and row["sites"] == "40" and row["volume"] == "40"

    doc = json.loads(_invoke("check", str(sweep), "--as", "json", "--quiet").stdout)
    schema = SweepRow.model_json_schema()
    for row in doc["sweep"]:
        jsonschema.validate(row, schema)  # an independent validator of the declared schema
    assert [r["run"] for r in doc["sweep"]] == [r["path"] for r in doc["runs"]]
    assert {_name(r["run"]): r["condensed"] for r in doc["sweep"]} == {
        k: v[0] for k, v in EXPECTED.items()
    }
    bad = dict(doc["sweep"][0], valid="broken")
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)

    table = _invoke("check", str(sweep), "--quiet").stdout
    assert "condensed" in table and "stationary" in table and "rho_c" in table
    line = next(t for t in table.splitlines() if "b4-condensed" in t and "zrp" in t)
    want = ["zrp", "sym.", "b=4", "40", "1.5", "0.5", "yes", "pass", "0", "pass"]
    assert line.split()[1:] == want


def test_summarize_sweep_as_csv_and_json(sweep, tmp_path):
    import shutil

    copy = shutil.copytree(sweep, tmp_path / "sweep")
    out = _invoke("summarize", str(copy), *QUICK, "--as", "csv")
    assert out.exit_code == 0, out.output
    rows = {_name(r["run"]): r for r in csv.DictReader(io.StringIO(out.stdout))}
    for name, (condensed, rho, _) in EXPECTED.items():
        row = rows[name]
        assert row["condensed"] == str(condensed) and row["stationary"] == "True"
        assert row["window_start"] == "0"
        fraction = float(row["condensate_fraction"])
        if condensed:  # theory: 1 - rho_c / rho = 2/3; a finite ring holds a little less
            assert 0.4 < fraction < 2 / 3 + 0.05
            assert float(row["expected_fraction"]) == pytest.approx(1 - 0.5 / rho)
        else:
            assert fraction < 0.05
    doc = json.loads(_invoke("summarize", str(copy), *QUICK, "--as", "json").stdout)
    assert {_name(r["path"]): r["row"]["condensed"] for r in doc["runs"]} == {
        k: v[0] for k, v in EXPECTED.items()
    }
    table = _invoke("summarize", str(copy), *QUICK).stdout
    assert "condensed" in table.splitlines()[0] and "stationary" in table.splitlines()[0]


@pytest.mark.parametrize(
    ("model", "total", "parameter", "rho_c", "condensed"),
    [
        ({"family": "cmam", "chipping": 3.0, "diffusion": 1.0}, 80, "w=3", 1.0, False),
        ({"family": "cmam", "chipping": 2.0, "diffusion": 0.5}, 200, "w=2,D=0.5", 5**0.5 - 1, True),
        ({"family": "zrp", "b": 2.5}, 300, "b=2.5", 2.0, True),
        ({"family": "zrp", "b": 2.0}, 900, "b=2", None, False),
        ({"family": "zrp", "rate": 1.0}, 900, "rate=1", None, False),
    ],
)
def test_sweep_point_against_the_critical_densities(model, total, parameter, rho_c, condensed):
    meta = parse_metadata(
        {
            "model": model,
            "lattice": {"sites": [10, 10], "boundary": "periodic"},
            "run": {"regime": "stationary", "total_mass": total},
        }
    )
    point = sweep_point(meta)
    assert point.parameter == parameter and point.volume == 100 and point.sites == [10, 10]
    assert point.density == pytest.approx(total / 100)
    if rho_c is None:
        assert point.critical_density is None
    else:
        assert math.isclose(point.critical_density, rho_c, rel_tol=1e-12)
    assert point.condensed is condensed
