"""What CI systems read: the JSON report against its committed JSON Schema, and the JUnit XML
against a published JUnit schema.

Outside truth: the independent validators `jsonschema` (Draft 2020-12) and `xmlschema`
(XSD 1.0), and the Jenkins JUnit XSD (tests/fixtures/junit/jenkins-junit.xsd, MIT; its
source is in the README beside it). The reports are real audits of runs written by our
writer: a single run under every check, a directory of runs (a collection) with a planted
mass leak, a flipped bit and an unfinished archive, a third-party check that raises, and an
empty audit; together they hold every status.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest
import xmlschema
from _audit_runs import RaisingCheck, chunk_file, write_run
from click.testing import CliRunner

from massarc.cli import cli
from massarc.validators import AuditReport, audit, register_check, render
from massarc.validators.engine import registry
from massarc.validators.report import report_schema

ROOT = Path(__file__).resolve().parents[1]
COMMITTED = ROOT / "schema" / "report.schema.json"
JUNIT_XSD = Path(__file__).parent / "fixtures" / "junit" / "jenkins-junit.xsd"
EXACT = ["schema", "integrity", "time-order", "nonnegative", "conservation"]


def _leak(m: np.ndarray, _t: np.ndarray) -> None:
    site = int(np.argmax(m[2, 40]))
    m[2, 40:, site] = np.maximum(m[2, 40:, site].astype(np.int64) - 1, 0)


@pytest.fixture(scope="module")
def reports(tmp_path_factory) -> dict[str, AuditReport]:
    d = tmp_path_factory.mktemp("ci")
    single = write_run(d / "single.zarr", seed=3)
    sweep = d / "sweep"
    write_run(sweep / "a-leak.zarr", edit=_leak, strict=False)
    flipped = write_run(sweep / "b-flipped.zarr", seed=4)
    f = chunk_file(flipped, 0, 1)
    raw = bytearray(f.read_bytes())
    raw[20] ^= 0x01  # one flipped bit: the checksum no longer matches
    f.write_bytes(bytes(raw))
    write_run(sweep / "c-unfinished.zarr", seed=5, close=False)
    out = {
        "single": audit([single]),
        "collection": audit([sweep], checks=EXACT, skip=["time-order"], strict=False),
        "strict": audit([sweep], checks=EXACT, strict=True, config="pyproject.toml"),
        "empty": audit([]),
    }
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(registry, "CHECKS", registry.CHECKS.fresh())
        register_check(RaisingCheck)
        out["error"] = audit([single], checks=["schema", "test-raises"])
    return out


def test_the_reports_hold_every_status(reports) -> None:
    seen = {c.status for r in reports.values() for run in r.runs for c in run.checks}
    assert seen == {"pass", "warn", "fail", "skip", "error"}
    assert len(reports["collection"].runs) == 3


def test_committed_report_schema_has_not_drifted() -> None:
    assert json.loads(COMMITTED.read_text()) == report_schema(), (
        "schema/report.schema.json is stale: regenerate with "
        "`massarc schema --of report > schema/report.schema.json`"
    )


def test_massarc_schema_prints_the_report_schema_and_keeps_its_default() -> None:
    runner = CliRunner()
    got = runner.invoke(cli, ["schema", "--of", "report"])
    assert got.exit_code == 0 and json.loads(got.output) == json.loads(COMMITTED.read_text())
    default = runner.invoke(cli, ["schema"])
    committed = json.loads((ROOT / "schema" / "metadata.schema.json").read_text())
    assert json.loads(default.output) == committed


@pytest.fixture(scope="module")
def report_validator() -> jsonschema.Draft202012Validator:
    schema = json.loads(COMMITTED.read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


@pytest.mark.parametrize("name", ["single", "collection", "strict", "empty", "error"])
def test_real_json_reports_follow_the_committed_schema(reports, report_validator, name) -> None:
    doc = json.loads(render(reports[name], "json"))
    errors = [e.message for e in report_validator.iter_errors(doc)]
    assert not errors, errors


def test_the_json_report_of_the_command_line_follows_the_schema(
    reports, report_validator, tmp_path
) -> None:
    path = Path(reports["collection"].runs[0].path).parent
    out = tmp_path / "report.json"
    got = CliRunner().invoke(cli, ["check", str(path), "--as", "json", "-o", str(out), "-q"])
    assert got.exit_code == 1, got.output  # a leak and a flipped bit fail
    report_validator.validate(json.loads(out.read_text()))


def test_the_report_schema_refuses_what_it_must(reports, report_validator) -> None:
    doc = json.loads(render(reports["single"], "json"))
    doc["runs"][0]["checks"][0]["status"] = "ok"  # not one of the five statuses
    assert not report_validator.is_valid(doc)
    doc = json.loads(render(reports["single"], "json"))
    doc["runs"][0]["checks"][0]["where"] = {"row": 3}  # not a location key
    assert not report_validator.is_valid(doc)
    doc = json.loads(render(reports["single"], "json"))
    del doc["runs"][0]["chunks"]
    assert not report_validator.is_valid(doc)


@pytest.fixture(scope="module")
def junit_schema() -> xmlschema.XMLSchema:
    return xmlschema.XMLSchema(str(JUNIT_XSD))


@pytest.mark.parametrize("name", ["single", "collection", "strict", "empty", "error"])
def test_real_junit_reports_follow_the_published_schema(reports, junit_schema, name) -> None:
    xml = render(reports[name], "junit")
    errors = [str(e.reason) for e in junit_schema.iter_errors(xml)]
    assert not errors, errors


def test_the_junit_schema_refuses_our_former_output(reports, junit_schema) -> None:
    # Until it was checked against the published schema massarc wrote a `skipped` count on
    # <testsuites> (the schema allows it on <testsuite> only) and the reason of a skip as a
    # `message` attribute of <skipped> (the schema gives it text only).
    xml = render(reports["collection"], "junit")
    assert junit_schema.is_valid(xml)
    count = xml.replace('<testsuites name="massarc check"', '<testsuites skipped="1" name="x"')
    reason = xml.replace("<skipped>", '<skipped message="not run">', 1)
    for former in (count, reason):
        assert former != xml and not junit_schema.is_valid(former)
