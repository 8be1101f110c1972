"""The pytest plugin: audit runs as test items of a simulator's own test suite.

pytest loads this module through the ``pytest11`` entry point ``massarc``; it does nothing
unless asked::

    pytest --massarc-runs runs/ sweep.zarr

turns every run found under the paths (runs, collections, directories of runs: the same
discovery as ``massarc check``) into test items, one per run and check, with node ids such
as ``runs/ring-64.zarr::conservation``. The test suite then fails when the simulator's
outputs do. The option takes every path up to the next option: put test paths before it
(``pytest tests/ --massarc-runs runs/``) or give one path per ``--massarc-runs=PATH``.
Without the option no item is added and no part of massarc's audit is imported
(``-p no:massarc`` unloads the plugin altogether).

The audit rules are those of ``massarc check`` (:mod:`massarc.validators.engine.settings`):
``[tool.massarc]`` of the nearest ``pyproject.toml`` (or ``massarc.toml``) from pytest's
rootdir upward, never a file that travels with the runs. Each run is audited once, in one
pass over its chunks, when its first item runs; its other items read that result (with
pytest-xdist, ``--dist loadscope`` keeps the items of a run on one worker, so that it is
audited once there too).

Statuses map onto pytest outcomes: ``pass`` passes; ``warn`` passes with a
:class:`CheckWarning` in the warnings summary (``strict = true`` makes it a failure, as for
``massarc check``); ``fail`` fails, showing the check's message, location, values and
thresholds as an assertion would; ``skip`` skips with the check's reason; ``error`` is an
error of the item (its setup), with the one-line reason. A path that holds no run, or
settings that cannot be used, stop the session with a usage error naming them.
"""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

if TYPE_CHECKING:
    from massarc.archive import Run
    from massarc.validators import AuditSettings, CheckResult

__all__ = ["CheckFailed", "CheckItem", "CheckWarning", "RunNode"]

_OPTION = "massarc_runs"


class CheckWarning(UserWarning):
    """A check that warned on a run (shown in pytest's warnings summary)."""


class CheckFailed(Exception):
    """A check that failed on a run; the item's report shows :meth:`describe`."""

    def __init__(self, run: str, result: CheckResult):
        super().__init__(f"{run}: {result.id}: {result.message}")
        self.run = run
        self.result = result

    def describe(self) -> str:
        """The check id, message, location, values and thresholds, one per line."""
        r = self.result
        lines = [f"massarc check {r.id!r} failed on {self.run}", f"  message: {r.message}"]
        where = r.where.model_dump(exclude_none=True) if r.where is not None else {}
        if where:
            lines.append("  where: " + ", ".join(f"{k} {v}" for k, v in where.items()))
        for label, table in (("values", r.values), ("thresholds", r.thresholds)):
            if table:
                lines.append(f"  {label}: " + ", ".join(f"{k}={v!r}" for k, v in table.items()))
        return "\n".join(lines)


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("massarc", "audit massarc runs as test items")
    group.addoption(
        "--massarc-runs",
        action="extend",
        nargs="+",
        default=[],
        metavar="PATH",
        dest=_OPTION,
        help="Audit every run under these paths (runs, collections, directories of runs): "
        "one test item per run and check, with the settings of [tool.massarc].",
    )


class RunNode(pytest.Collector):
    """The items of one run; audits the run once, when its first item asks."""

    def __init__(self, *, run: Run, settings: AuditSettings, ids: list[str], **kwargs: Any):
        super().__init__(**kwargs)
        self.run = run
        self.settings = settings
        self.ids = ids
        self._results: dict[str, CheckResult] | None = None

    def collect(self) -> list[CheckItem]:
        return [CheckItem.from_parent(self, name=cid) for cid in self.ids]

    def result(self, check_id: str) -> CheckResult:
        """The result of ``check_id`` on this run (the audit runs on the first call)."""
        if self._results is None:
            from massarc.validators import audit

            s = self.settings
            report = audit(
                [self.run],
                checks=s.only,
                skip=s.skip,
                options=s.options,
                strict=s.strict,
                config=s.source,
            )
            self._results = {r.id: r for r in report.runs[0].checks}
        return self._results[check_id]


class CheckItem(pytest.Item):
    """One check on one run."""

    parent: RunNode

    def setup(self) -> None:
        result = self.parent.result(self.name)
        if result.status == "error":  # pytest's "error" outcome belongs to the setup phase
            pytest.fail(
                f"massarc check {self.name!r} could not judge {self.parent.name}: {result.message}",
                pytrace=False,
            )

    def runtest(self) -> None:
        result = self.parent.result(self.name)
        if result.status == "skip":  # reported at the run, not at this line
            raise pytest.skip.Exception(result.message, _use_item_location=True)
        if result.status == "fail":
            raise CheckFailed(self.parent.name, result)
        if result.status == "warn":
            text = f"{self.parent.name}: {self.name}: {result.message}"
            # located at the run, not at this line of the plugin
            warnings.warn_explicit(CheckWarning(text), CheckWarning, str(self.path), 0)

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> Any:
        if isinstance(excinfo.value, CheckFailed):
            return excinfo.value.describe()
        return super().repr_failure(excinfo, style=style)

    def reportinfo(self) -> tuple[Path, int, str]:
        # the headline of a failure; not a suffix of the node id, so verbose lines show that
        return self.path, 0, f"{self.name} on {self.parent.name}"


def _node_name(run: Run, root: Path) -> str:
    """The run's path relative to pytest's rootdir when it lies inside, else as given."""
    path = Path(run.name)
    try:
        return path.resolve().relative_to(root.resolve()).as_posix()
    except (ValueError, OSError):
        return path.as_posix()


@pytest.hookimpl(tryfirst=True)  # before -k, -m and --deselect look at the items
def pytest_collection_modifyitems(
    session: pytest.Session, config: pytest.Config, items: list[pytest.Item]
) -> None:
    locations = config.getoption(_OPTION)
    if not locations:
        return
    from massarc.archive import ArchiveError
    from massarc.validators import ConfigError, available_checks, open_for_audit
    from massarc.validators import resolve_settings as settings_of

    try:
        settings = settings_of(cwd=config.rootpath)
    except ConfigError as exc:
        raise pytest.UsageError(f"massarc settings: {exc}") from None
    ids = list(settings.only) if settings.only is not None else list(available_checks())
    seen: set[str] = set()  # a run under two of the paths is audited once
    for location in locations:
        try:
            runs = open_for_audit(location)
        except ArchiveError as exc:
            raise pytest.UsageError(f"--massarc-runs {location}: {exc}") from None
        for run in runs:
            name = _node_name(run, config.rootpath)
            if name in seen:
                continue
            seen.add(name)
            node = RunNode.from_parent(
                session,
                name=name,
                nodeid=name,
                path=Path(run.name).resolve(),
                run=run,
                settings=settings,
                ids=ids,
            )
            collected = node.collect()
            # reported like any collector's items, so that "collected N items" counts them
            report = pytest.CollectReport(node.nodeid, "passed", None, collected)
            config.hook.pytest_collectreport(report=report)
            items.extend(collected)
