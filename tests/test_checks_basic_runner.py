"""The runner: one scan per run shared by all checks, raising checks isolated, plugins."""

from __future__ import annotations

import sys
from importlib.metadata import EntryPoint
from typing import ClassVar

import pytest
from _audit_runs import write_run

from massarc.archive import ArchiveError
from massarc.archive import registry as registry_helper
from massarc.archive import scan as scan_module
from massarc.validators import (
    Check,
    CheckContext,
    ConfigError,
    Option,
    audit,
    available_checks,
    register_check,
)
from massarc.validators.engine import registry, runner


class _Raises(Check):
    id = "test-raises"
    description = "a plugin with a bug"
    needs: ClassVar = {"snapshots": {}}

    def run(self, ctx: CheckContext):
        raise ZeroDivisionError("division by zero in the plugin\nTraceback line")


class _Options(Check):
    id = "test-options"
    description = "echoes its options and the statistics it got"
    needs: ClassVar = {"histogram": {"bins": 8}, "snapshots": {}}
    options: ClassVar = {
        "level": Option(1.5, float, "a level to echo"),
        "label": Option("x", str, "a label to echo"),
    }

    def run(self, ctx: CheckContext):
        hist = ctx.stats["histogram"]
        values = {**ctx.options, "bins": hist.counts.shape[2], "cached": ctx.derived("k", id)}
        return self.result("warn", "just a warning", values=values)


@pytest.fixture
def extra_checks(monkeypatch):
    """The built-in checks and two test plugins, in a registry of this test only."""
    monkeypatch.setattr(registry, "CHECKS", registry.CHECKS.fresh())
    register_check(_Raises)
    register_check(_Options)


def test_raising_check_is_an_error_and_others_run(tmp_path, extra_checks) -> None:
    path = write_run(tmp_path / "r.zarr")
    report = audit([path], checks=["schema", "test-raises", "conservation"])
    got = {c.id: c for c in report.runs[0].checks}
    assert got["test-raises"].status == "error"
    assert got["test-raises"].message == "ZeroDivisionError: division by zero in the plugin"
    assert got["schema"].status == got["conservation"].status == "pass"
    assert report.runs[0].status == "error" and report.exit_code == 1


def test_one_scan_feeds_every_check(tmp_path, extra_checks, monkeypatch) -> None:
    calls = []
    real = scan_module.scan

    def spy(run, statistics, **kw):
        stats = statistics.values()
        calls.append(sorted((s.name, tuple(sorted(s.options.items()))) for s in stats))
        return real(run, statistics, **kw)

    monkeypatch.setattr(runner, "scan", spy)
    path = write_run(tmp_path / "r.zarr")
    report = audit(
        [path, path],
        checks=["integrity", "nonnegative", "conservation", "test-options"],
        options={"test-options": {"level": 3}},
    )
    # per run one pass; 'snapshots' shared by four checks, one histogram instance
    assert calls == [[("histogram", (("bins", 8),)), ("snapshots", ())]] * 2
    opt = next(c for c in report.runs[0].checks if c.id == "test-options")
    assert (opt.values["level"], opt.values["label"], opt.values["bins"]) == (3, "x", 8)


def test_strict_turns_warnings_into_failures(tmp_path, extra_checks) -> None:
    path = write_run(tmp_path / "r.zarr")
    loose = audit([path], checks=["test-options"])
    strict = audit([path], checks=["test-options"], strict=True)
    assert loose.runs[0].checks[0].status == "warn" and loose.exit_code == 0
    assert strict.runs[0].checks[0].status == "fail" and strict.exit_code == 1
    assert strict.strict


def test_skipped_checks_are_listed_in_order(tmp_path) -> None:
    path = write_run(tmp_path / "r.zarr")
    report = audit([path], checks=["schema", "integrity", "time-order"], skip=["integrity"])
    assert [(c.id, c.status) for c in report.runs[0].checks] == [
        ("schema", "pass"),
        ("integrity", "skip"),
        ("time-order", "pass"),
    ]


def test_unknown_ids_and_options_are_errors(tmp_path) -> None:
    path = write_run(tmp_path / "r.zarr")
    with pytest.raises(ConfigError, match=r"expected one of schema, .*; got 'nope'"):
        audit([path], checks=["nope"])
    with pytest.raises(ConfigError, match=r"options\.conservation: expected one of tolerance"):
        audit([path], options={"conservation": {"tolerence": 1}})


def test_unknown_major_version_is_refused(tmp_path) -> None:
    import zarr

    path = write_run(tmp_path / "r.zarr")
    g = zarr.open_group(str(path), mode="r+")
    g.attrs["massarc"] = {**g.attrs["massarc"], "format_version": "2.0"}
    with pytest.raises(ArchiveError, match=r"format_version: expected 1\.x .*got 2\.0"):
        audit([path])


def test_collection_directory(tmp_path) -> None:
    write_run(tmp_path / "sweep" / "a.zarr")
    write_run(tmp_path / "sweep" / "b.zarr", seed=4)
    report = audit([tmp_path / "sweep"], checks=["conservation"])
    assert [r.path.rsplit("/", 1)[-1] for r in report.runs] == ["a.zarr", "b.zarr"]


_PLUGIN = """
from massarc.validators import Check

class Shout(Check):
    id = "test-entry-point"
    description = "registered through the massarc.checks entry-point group"

    def run(self, ctx):
        return self.result("pass", f"{ctx.run.n_replicas} replicas seen")
"""


def test_entry_point_plugin_is_loaded_and_run(tmp_path, monkeypatch) -> None:
    (tmp_path / "massarc_test_plugin.py").write_text(_PLUGIN)
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.delitem(sys.modules, "massarc_test_plugin", raising=False)
    ep = EntryPoint("shout", "massarc_test_plugin:Shout", registry.ENTRY_POINT_GROUP)
    broken = EntryPoint("broken", "massarc_test_plugin:Missing", registry.ENTRY_POINT_GROUP)
    monkeypatch.setattr(
        registry_helper, "entry_points", lambda group: [ep, broken] if group == ep.group else []
    )
    monkeypatch.setattr(registry, "CHECKS", registry.CHECKS.fresh())
    with pytest.warns(UserWarning, match="skipping check plugin 'broken'"):
        assert "test-entry-point" in available_checks()
    report = audit([write_run(tmp_path / "r.zarr")], checks=["test-entry-point"])
    assert report.runs[0].checks[0].message == "3 replicas seen"


def test_progress_spans_all_runs(tmp_path) -> None:
    a = write_run(tmp_path / "a.zarr", snapshots=30)
    b = write_run(tmp_path / "b.zarr", snapshots=20)
    seen = []
    audit([a, b], checks=["conservation"], progress=lambda d, t, _u: seen.append((d, t)))
    assert seen[-1] == (15, 15) and all(t == 15 for _, t in seen)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)
