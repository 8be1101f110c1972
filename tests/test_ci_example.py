"""docs/ci-example.yml: its steps are valid shell whose massarc commands work.

The steps after the install run under bash, as a CI service runs them, on a directory with
a clean run and a leaking one (written by our writer), with the massarc of this checkout on
PATH. Outside truth: bash runs the commands; the reports it leaves are checked with the
independent validators `jsonschema` (against schema/report.schema.json) and `xmlschema`
(against the published Jenkins JUnit XSD of tests/fixtures/junit/).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import jsonschema
import numpy as np
import pytest
import xmlschema
import yaml
from _audit_runs import write_run

from massarc.cli import COMMANDS

ROOT = Path(__file__).resolve().parents[1]
PIPELINE = ROOT / "docs" / "ci-example.yml"


def _leak(m: np.ndarray, _t: np.ndarray) -> None:
    site = int(np.argmax(m[1, 10]))
    m[1, 10:, site] = np.maximum(m[1, 10:, site].astype(np.int64) - 1, 0)


@pytest.fixture(scope="module")
def pipeline() -> dict:
    doc = yaml.safe_load(PIPELINE.read_text(encoding="utf-8"))
    assert isinstance(doc["steps"], list) and all({"name", "run"} <= set(s) for s in doc["steps"])
    return doc


@pytest.fixture(scope="module")
def workspace(pipeline, tmp_path_factory) -> Path:
    """A checkout that keeps runs, after every step but the install has run."""
    bash = shutil.which("bash")
    assert bash is not None, "the example pipeline is bash; expected bash on PATH"
    d = tmp_path_factory.mktemp("ci")
    write_run(d / "runs" / "clean.zarr", seed=1)
    write_run(d / "runs" / "leak.zarr", seed=2, edit=_leak, strict=False)
    (d / "pyproject.toml").write_text(  # the project's own rules: the exact checks only
        '[tool.massarc]\nskip = ["steady-state", "boundary", "stationary-law", "drift", '
        '"independence"]\n'
    )
    env = {
        **os.environ,
        **{k: str(v) for k, v in pipeline.get("variables", {}).items()},
        "PATH": f"{Path(sys.executable).parent}{os.pathsep}{os.environ['PATH']}",
    }
    codes = []
    for step in pipeline["steps"][1:]:
        done = subprocess.run(
            [bash, "-e", "-c", step["run"]], cwd=d, env=env, capture_output=True, text=True
        )
        codes.append(done.returncode)
        assert done.returncode in (0, 1), f"{step['name']}: {done.stderr}"
    (d / "codes.json").write_text(json.dumps(codes))
    return d


def test_the_install_step_installs_this_package(pipeline) -> None:
    name = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["name"]
    assert pipeline["steps"][0]["run"].split() == ["python", "-m", "pip", "install", name]


def test_the_pipeline_fails_on_the_leak_and_keeps_both_reports(pipeline, workspace) -> None:
    codes = json.loads((workspace / "codes.json").read_text())
    assert codes[:-1] == [0] * (len(codes) - 1)  # the audit itself never stops the steps
    assert codes[-1] == 1  # the last step fails the pipeline: conservation failed
    report = json.loads((workspace / "massarc-report.json").read_text())
    schema = json.loads((ROOT / "schema" / "report.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(report)
    statuses = {Path(r["path"]).name: r["status"] for r in report["runs"]}
    assert statuses == {"clean.zarr": "pass", "leak.zarr": "fail"}
    junit = xmlschema.XMLSchema(str(ROOT / "tests" / "fixtures" / "junit" / "jenkins-junit.xsd"))
    junit.validate(str(workspace / "massarc-junit.xml"))
    kept = pipeline["artifacts"]["paths"]
    assert "massarc-report.json" in kept and "massarc-junit.xml" in kept


def test_the_html_step_follows_the_report_command(pipeline, workspace) -> None:
    html = workspace / "html"
    if "report" in COMMANDS:  # the command exists: one page per run, kept as an artefact
        assert sorted(p.name for p in html.iterdir()) == ["clean.html", "leak.html"]
        assert "html/" in pipeline["artifacts"]["paths"]
    else:  # the step is guarded and does nothing
        assert not html.exists()
