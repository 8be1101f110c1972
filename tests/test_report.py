"""Reports: the JSON shape outside tools rely on, JUnit XML that parses with the right
counts (xml.etree.ElementTree as the reference parser), and the plain table."""

from __future__ import annotations

import io
import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from _audit_runs import chunk_file, write_run

from massarc.validators import AuditReport, CheckResult, RunReport, Where, audit, render
from massarc.validators.report import render_table


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    d = tmp_path_factory.mktemp("runs")

    def lose(m, t):  # replica 2 loses one unit at snapshot 40 (and keeps it lost)
        site = int(np.argmax(m[2, 40]))
        m[2, 40:, site] = np.maximum(m[2, 40:, site].astype(np.int64) - 1, 0)

    bad = write_run(d / "bad.zarr", edit=lose, strict=False)
    f = chunk_file(bad, 0, 1)
    raw = bytearray(f.read_bytes())
    raw[20] ^= 0x01  # one flipped bit: the checksum no longer matches
    f.write_bytes(bytes(raw))
    good = write_run(d / "good.zarr", close=False)  # incomplete: a warning
    return audit([bad, good], checks=["schema", "integrity", "conservation", "time-order"])


def test_json_shape(two_runs) -> None:
    doc = json.loads(render(two_runs, "json"))
    bad, good = doc["runs"]
    assert bad["status"] == "fail" and good["status"] == "warn" and doc["status"] == "fail"
    checks = {c["id"]: c for c in bad["checks"]}
    cons = checks["conservation"]
    assert set(cons) == {"id", "status", "message", "where", "values", "thresholds"}
    assert cons["where"] == {"replica": 2, "snapshot": 40}  # null keys left out
    assert cons["status"] == "fail" and cons["thresholds"] == {"tolerance": 0}
    assert isinstance(cons["values"]["discrepancy"], int)
    assert checks["integrity"]["where"]["chunk"] == "mass/c/0/1/0"
    assert "where" not in checks["time-order"]  # no location at all
    assert bad["path"].endswith("bad.zarr") and doc["massarc_version"]


def test_junit_counts_and_escaping(two_runs) -> None:
    root = ET.fromstring(render(two_runs, "junit"))
    assert root.tag == "testsuites"
    assert (root.get("tests"), root.get("failures"), root.get("errors")) == ("8", "2", "0")
    suites = root.findall("testsuite")
    assert [s.get("name") for s in suites] == [r.path for r in two_runs.runs]
    cases = suites[0].findall("testcase")
    assert [c.get("name") for c in cases] == ["schema", "integrity", "conservation", "time-order"]
    assert all(c.get("classname") == two_runs.runs[0].path for c in cases)
    failure = cases[1].find("failure")
    assert failure is not None and "mass/c/0/1/0" in failure.get("message")
    assert json.loads(failure.text)["where"]["chunk"] == "mass/c/0/1/0"
    warn = suites[1].findall("testcase")[0]
    assert warn.find("failure") is None and "incomplete" in warn.find("system-out").text


def test_junit_error_and_skip_elements() -> None:
    results = [
        CheckResult(id="a", status="error", message='boom <b> & "q"'),
        CheckResult(id="b", status="skip", message="not run: no data"),
        CheckResult(id="c", status="pass", message="fine"),
    ]
    report = AuditReport(
        runs=[RunReport(path="x&y.zarr", status="error", checks=results)],
        status="error",
        massarc_version="t",
    )
    root = ET.fromstring(render(report, "junit"))
    suite = root.find("testsuite")
    assert (suite.get("errors"), suite.get("skipped"), suite.get("tests")) == ("1", "1", "3")
    a, b, c = suite.findall("testcase")
    assert a.find("error").get("message") == 'boom <b> & "q"'
    assert b.find("skipped").text == "not run: no data"
    assert list(c) == [] and suite.get("name") == "x&y.zarr"


def test_table_is_plain_off_a_terminal(two_runs) -> None:
    text = render(two_runs, "table")
    assert "\x1b[" not in text  # no colour codes in a file
    lines = text.splitlines()
    assert any("conservation" in ln and " fail " in ln and "replica 2" in ln for ln in lines)
    assert "2 runs audited" in lines[-1] and "runs: 1 warn, 1 fail" in lines[-1]
    buf = io.StringIO()
    render_table(two_runs, buf, quiet=True)
    rows = buf.getvalue().splitlines()[:-1]  # the table without the summary line
    assert not any(" pass " in ln for ln in rows) and any(" fail " in ln for ln in rows)


def test_table_uses_the_status_words_of_json_and_junit(two_runs) -> None:
    text = render(two_runs, "table")
    shown = {c.status for r in two_runs.runs for c in r.checks}
    words = {w for ln in text.splitlines() for w in ln.split()}
    assert shown <= words  # each status appears as itself
    assert not {"ok", "FAIL", "ERROR", "passed", "failed"} & words


def test_an_axis_is_shown_in_every_rendering() -> None:
    # a drift verdict points at a lattice axis, named as the mass array's dimension is
    results = [
        CheckResult(id="drift", status="fail", message="driven", where=Where(axis="x")),
        CheckResult(id="other", status="warn", message="w", where=Where(replica=1, axis="y")),
    ]
    report = AuditReport(
        runs=[RunReport(path="r.zarr", status="fail", checks=results)],
        status="fail",
        massarc_version="t",
    )
    doc = json.loads(render(report, "json"))
    drift, other = doc["runs"][0]["checks"]
    assert set(drift) == {"id", "status", "message", "where", "values", "thresholds"}
    assert drift["where"] == {"axis": "x"}  # null keys still left out
    assert other["where"] == {"replica": 1, "axis": "y"}
    cases = ET.fromstring(render(report, "junit")).find("testsuite").findall("testcase")
    assert json.loads(cases[0].find("failure").text)["where"] == {"axis": "x"}
    assert '"axis": "y"' in cases[1].find("system-out").text
    rows = render(report, "table").splitlines()
    assert any("drift" in ln and "axis x" in ln for ln in rows)
    assert any("other" in ln and "replica 1, axis y" in ln for ln in rows)
