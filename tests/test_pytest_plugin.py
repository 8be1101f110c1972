"""The pytest plugin (``pytest --massarc-runs PATH...``), driven through pytest's own
``pytester`` fixture: an inner pytest session, loaded with the plugin through its
``pytest11`` entry point as any user's would be, audits runs written by our writer.

Outside truth: pytest itself decides the outcomes (its exit codes, outcome counts and
report text), not our code; a mass leak planted in the data is the known fault.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from _audit_runs import RaisingCheck, write_run

from massarc.validators import register_check
from massarc.validators.engine import registry

pytest_plugins = ["pytester"]

#: The exact checks only: a simulator's suite that audits bookkeeping, in seconds.
EXACT_ONLY = """
[tool.massarc]
skip = ["steady-state", "boundary", "stationary-law", "drift", "independence"]
"""


def _leak(m: np.ndarray, _t: np.ndarray) -> None:
    """Replica 1 loses one unit of mass at snapshot 30 and never gets it back."""
    site = int(np.argmax(m[1, 30]))
    m[1, 30:, site] = np.maximum(m[1, 30:, site].astype(np.int64) - 1, 0)


@pytest.fixture
def runs(pytester: pytest.Pytester) -> dict[str, Path]:
    pytester.makepyprojecttoml(EXACT_ONLY)
    base = pytester.path / "runs"
    return {
        "clean": write_run(base / "clean.zarr", seed=1),
        "leak": write_run(base / "leak.zarr", seed=2, edit=_leak, strict=False),
    }


def test_a_leaking_run_fails_the_inner_session_and_a_clean_one_passes(
    pytester, runs, monkeypatch
) -> None:
    from massarc.validators.engine import runner

    scanned: list[str] = []  # each run is audited once: one single pass per run
    real = runner.scan

    def counting(run, statistics, **kw):
        scanned.append(Path(run.name).name)
        return real(run, statistics, **kw)

    monkeypatch.setattr(runner, "scan", counting)
    result = pytester.runpytest("--massarc-runs", str(runs["clean"]), str(runs["leak"]), "-rA")
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    # per run, 5 exact checks run and 5 statistical ones are skipped by [tool.massarc]
    result.assert_outcomes(passed=9, failed=1, skipped=10)
    assert sorted(scanned) == ["clean.zarr", "leak.zarr"]
    result.stdout.fnmatch_lines(
        [
            "*_ conservation on runs/leak.zarr _*",
            "massarc check 'conservation' failed on runs/leak.zarr",
            "*message: closed system: replica 1, snapshot 30 holds total mass 39, expected 40*",
            "*where: replica 1, snapshot 30",
            "*thresholds: tolerance=0",
        ]
    )
    result.stdout.fnmatch_lines(["PASSED runs/clean.zarr::conservation"])
    # newer pytest (9.x here) adds " - <first line of the report>"; 8.0, our floor, does not
    result.stdout.fnmatch_lines(["FAILED runs/leak.zarr::conservation*"])


def test_a_directory_of_runs_gives_one_item_per_run_and_check(pytester, runs) -> None:
    result = pytester.runpytest("--massarc-runs", str(pytester.path / "runs"), "--co", "-q")
    ids = [line for line in result.stdout.lines if "::" in line]
    checks = ["schema", "integrity", "time-order", "nonnegative", "conservation"]
    assert [i for i in ids if i.endswith(tuple(f"::{c}" for c in checks))] == [
        f"runs/{name}.zarr::{c}" for name in ("clean", "leak") for c in checks
    ]
    assert len(ids) == 20  # every registered check, skipped ones included
    # a run named twice is collected once; -k selects among the items as among tests
    twice = [str(runs["leak"]), str(pytester.path / "runs")]
    chosen = pytester.runpytest("--massarc-runs", *twice, "-k", "conservation", "--co", "-q")
    assert [line for line in chosen.stdout.lines if "::" in line] == [
        "runs/leak.zarr::conservation",
        "runs/clean.zarr::conservation",
    ]


def test_thresholds_come_from_tool_massarc(pytester, runs) -> None:
    pytester.makepyprojecttoml(EXACT_ONLY + "[tool.massarc.checks.conservation]\ntolerance = 1\n")
    result = pytester.runpytest("--massarc-runs", str(runs["leak"]))
    assert result.ret == pytest.ExitCode.OK  # a leak of one unit is within the tolerance
    result.assert_outcomes(passed=5, skipped=5)


def test_settings_skip_maps_to_pytest_skip_and_strict_turns_warnings_into_failures(
    pytester, runs
) -> None:
    unfinished = write_run(pytester.path / "runs" / "unfinished.zarr", close=False)
    result = pytester.runpytest("--massarc-runs", str(unfinished), "-rs")
    result.assert_outcomes(passed=5, skipped=5, warnings=1)  # schema: archive incomplete
    result.stdout.fnmatch_lines(["*CheckWarning*unfinished.zarr: schema: *incomplete*"])
    result.stdout.fnmatch_lines(["*SKIPPED*not run: skipped by configuration*"])
    pytester.makepyprojecttoml(
        EXACT_ONLY.replace("[tool.massarc]", "[tool.massarc]\nstrict = true")
    )
    strict = pytester.runpytest("--massarc-runs", str(unfinished))
    strict.assert_outcomes(passed=4, failed=1, skipped=5)


def test_a_check_that_raises_is_an_error_of_its_item(pytester, runs, monkeypatch) -> None:
    monkeypatch.setattr(registry, "CHECKS", registry.CHECKS.fresh())
    register_check(RaisingCheck)
    result = pytester.runpytest("--massarc-runs", str(runs["clean"]))
    result.assert_outcomes(passed=5, skipped=5, errors=1)
    result.stdout.fnmatch_lines(
        [
            "*ERROR at setup of test-raises on runs/clean.zarr*",
            "*ZeroDivisionError: division by zero in the plugin*",
        ]
    )


def test_without_the_option_the_plugin_adds_nothing(pytester, runs) -> None:
    pytester.makepyfile(test_sim="def test_simulator():\n    assert True\n")
    result = pytester.runpytest("-v")
    result.assert_outcomes(passed=1)
    assert not any(".zarr::" in line for line in result.stdout.lines)
    pytester.runpytest("--help").stdout.re_match_lines([r".*--massarc-runs.*"])


def test_a_path_without_runs_is_a_usage_error(pytester, runs) -> None:
    (pytester.path / "empty").mkdir()
    result = pytester.runpytest("--massarc-runs", str(pytester.path / "empty"))
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    result.stderr.fnmatch_lines(["*--massarc-runs *empty: *holds no massarc run*"])
    pytester.makepyprojecttoml('[tool.massarc]\nskip = ["no-such-check"]\n')
    bad = pytester.runpytest("--massarc-runs", str(runs["clean"]))
    assert bad.ret == pytest.ExitCode.USAGE_ERROR
    bad.stderr.fnmatch_lines(["*massarc settings: *pyproject.toml: tool.massarc.skip: *"])
