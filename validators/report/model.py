"""The audit report: frozen pydantic models the runner fills and the renderers read."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from massarc.schema.sweep import SweepPoint

from ..engine.result import CheckResult, Status, worst

__all__ = ["AuditReport", "OptionSetting", "RunReport"]


class _Frozen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class RunReport(_Frozen):
    """The checks of one run. ``status`` is the worst of its checks'."""

    path: str
    status: Status
    checks: list[CheckResult]
    seconds: float = 0.0
    check_seconds: dict[str, float] = Field(default_factory=dict)
    chunks: int = 0
    chunks_read: int = 0
    bytes_decoded: int = 0
    #: The run's model parameters, for the sweep table (None without valid metadata).
    point: SweepPoint | None = None


class OptionSetting(_Frozen):
    """A check option the audit did not take from its default, and where it came from:
    ``source`` is the configuration file, ``--set``, or ``options`` (the ``audit`` call)."""

    check: str
    option: str
    value: Any
    default: Any
    source: str


class AuditReport(_Frozen):
    """One audit of one or more runs.

    >>> r = AuditReport(runs=[], status="skip", massarc_version="0")
    >>> r.exit_code
    0
    """

    runs: list[RunReport]
    status: Status
    massarc_version: str
    strict: bool = False
    seconds: float = 0.0
    config: str | None = None
    #: Every option not at its default, with where it came from.
    options: list[OptionSetting] = Field(default_factory=list)
    #: Configuration files inside the audited runs and collections, found and not read.
    ignored: list[str] = Field(default_factory=list)

    @property
    def failed(self) -> bool:
        """True when a check failed or raised."""
        return any(c.status in ("fail", "error") for r in self.runs for c in r.checks)

    @property
    def exit_code(self) -> int:
        """0 when nothing failed, 1 otherwise (the CLI's status for a completed audit)."""
        return 1 if self.failed else 0

    def _repr_html_(self) -> str:
        """The report as a table in a Jupyter notebook (every datum escaped)."""
        from .notebook import report_notebook_html

        return report_notebook_html(self)

    @staticmethod
    def status_of(results: list[CheckResult]) -> str:
        """The worst status of several results."""
        return worst([c.status for c in results])
