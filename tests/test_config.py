"""Configuration: where settings come from, which wins, and errors that name file and key."""

from __future__ import annotations

import numpy as np
import pytest

from massarc.validators.engine.settings import (
    ConfigError,
    find_config,
    load_settings,
    resolve_settings,
)

PYPROJECT = """
[project]
name = "demo"

[tool.massarc]
skip = ["time-order"]
strict = true

[tool.massarc.checks.conservation]
tolerance = 2
"""


def test_pyproject_found_upward(tmp_path) -> None:
    (tmp_path / "pyproject.toml").write_text(PYPROJECT)
    deep = tmp_path / "a" / "b"
    deep.mkdir(parents=True)
    assert find_config(cwd=deep) == tmp_path / "pyproject.toml"
    s = resolve_settings(cwd=deep)
    assert (s.skip, s.strict, s.options) == (
        ("time-order",),
        True,
        {"conservation": {"tolerance": 2}},
    )
    assert s.source == str(tmp_path / "pyproject.toml")


def test_pyproject_without_table_is_passed_over(tmp_path) -> None:
    (tmp_path / "pyproject.toml").write_text(PYPROJECT)
    inner = tmp_path / "inner"
    inner.mkdir()
    (inner / "pyproject.toml").write_text('[project]\nname = "other"\n')
    assert find_config(cwd=inner) == tmp_path / "pyproject.toml"


def test_massarc_toml_of_the_project_wins_and_cli_overrides(tmp_path) -> None:
    (tmp_path / "pyproject.toml").write_text(PYPROJECT)
    project = tmp_path / "project"
    project.mkdir()
    (project / "massarc.toml").write_text(
        'skip = ["schema"]\nstrict = false\n[checks.conservation]\ntolerance = 5\n'
    )
    s = resolve_settings(cwd=project)
    assert s.source == str(project / "massarc.toml")
    assert (s.skip, s.strict, s.options["conservation"]) == (("schema",), False, {"tolerance": 5})
    # the command line overrides the file
    s = resolve_settings(
        cwd=project, strict=True, skip=["integrity"], sets=["conservation.tolerance=1"]
    )
    assert (s.skip, s.strict, s.options["conservation"]) == (
        ("schema", "integrity"),
        True,
        {"tolerance": 1},
    )
    # --only names a check the file skips: it runs
    s = resolve_settings(cwd=project, only=["schema"])
    assert (s.only, s.skip) == (("schema",), ())
    # --config names a file explicitly: it wins over both
    other = tmp_path / "ci.toml"
    other.write_text("strict = true\n")
    s = resolve_settings(config=other, cwd=project)
    assert (s.source, s.skip, s.strict) == (str(other), (), True)


def test_a_file_that_travels_with_the_runs_never_sets_the_rules(tmp_path) -> None:
    """A downloaded collection carries a massarc.toml inside a run and beside the runs that
    would let a run losing mass pass: the audit must not read either (common practice:
    the auditor's rules, not the data's)."""
    from conftest import make_meta

    from massarc.archive import create_run
    from massarc.validators import audit

    data = tmp_path / "download"
    run = data / "leaky.zarr"
    masses = np.full((2, 6, 8), 3, np.int64)
    masses[1, 3:, 0] -= 1  # replica 1 loses one unit from snapshot 3 on
    with create_run(run, make_meta(sites=(8,)), strict=False) as w:
        w.append(np.arange(6.0), masses)
    lenient = "[checks.conservation]\ntolerance = 100000\n"
    (run / "massarc.toml").write_text(lenient)
    (data / "massarc.toml").write_text(lenient)
    auditor = tmp_path / "auditor"
    auditor.mkdir()
    s = resolve_settings(cwd=auditor)
    assert s.source is None and s.options == {}
    s = resolve_settings(cwd=data)  # even run from the download folder: that is a choice
    assert s.source == str(data / "massarc.toml")
    report = audit([run], options=resolve_settings(cwd=auditor).options)
    by_id = {c.id: c for c in report.runs[0].checks}
    assert by_id["conservation"].status == "fail"
    assert by_id["conservation"].where is not None and by_id["conservation"].where.replica == 1


@pytest.mark.parametrize(
    ("text", "pattern"),
    [
        ('skip = ["nope"]', r"massarc\.toml: skip: expected one of schema, .*; got 'nope'"),
        ("colour = 1", r"massarc\.toml: colour: expected one of checks, skip, strict"),
        ("strict = 1", r"massarc\.toml: strict: expected true or false; got 1"),
        ("[checks.nope]\nx = 1", r"checks: expected a check id, one of .*; got 'nope'"),
        ("[checks.conservation]\ntol = 1", r"checks\.conservation: expected one of tolerance"),
        (
            '[checks.conservation]\ntolerance = "a"',
            r"checks\.conservation\.tolerance: expected a number; got 'a'",
        ),
        ('strict = true\nskip = ["a" "b"]', r"massarc\.toml: invalid TOML \(.*line 2"),
    ],
)
def test_bad_files_name_file_and_key(tmp_path, text, pattern) -> None:
    f = tmp_path / "massarc.toml"
    f.write_text(text + "\n")
    with pytest.raises(ConfigError, match=pattern):
        load_settings(f)


def test_pyproject_errors_use_the_tool_key_path(tmp_path) -> None:
    f = tmp_path / "pyproject.toml"
    f.write_text("[tool.massarc]\nskp = []\n")
    with pytest.raises(ConfigError, match=r"pyproject\.toml: tool\.massarc\.skp: expected one of"):
        load_settings(f)


@pytest.mark.parametrize(
    ("sets", "pattern"),
    [
        (["conservation"], r"--set 'conservation': expected ID\.OPTION=VALUE"),
        (["a.b.c=1"], r"expected ID\.OPTION=VALUE"),
        (["nope.x=1"], r"--set: expected a check id"),
        (["conservation.x=1"], r"--set conservation: expected one of tolerance; got 'x'"),
        # values against the options' declared types
        (["steady-state.min_snapshots=8.5"], r"steady-state\.min_snapshots: expected an integer"),
        (["boundary.alpha=true"], r"boundary\.alpha: expected a number; got True"),
        (["conservation.tolerance=lots"], r"conservation\.tolerance: expected a number"),
    ],
)
def test_bad_set_options(tmp_path, sets, pattern) -> None:
    with pytest.raises(ConfigError, match=pattern):
        resolve_settings(cwd=tmp_path, sets=sets)


def test_missing_explicit_config(tmp_path) -> None:
    with pytest.raises(ConfigError, match=r"no such configuration file"):
        resolve_settings(config=tmp_path / "absent.toml", cwd=tmp_path)


def test_an_int_is_a_number_and_is_kept_as_given(tmp_path) -> None:
    s = resolve_settings(cwd=tmp_path, sets=["steady-state.drift_z=4", "boundary.alpha=0.01"])
    assert s.options == {"steady-state": {"drift_z": 4}, "boundary": {"alpha": 0.01}}
    assert isinstance(s.options["steady-state"]["drift_z"], int)
