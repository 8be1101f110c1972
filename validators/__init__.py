"""massarc.validators: audit runs against what they claim.

* :func:`audit` runs the registered checks on runs and collections, from one pass over
  each run's chunks, and returns an :class:`AuditReport` (render it with
  :func:`~massarc.validators.report.render`: table, JSON or JUnit XML);
* :class:`Check`, :class:`CheckContext`, :class:`CheckResult` and :func:`register_check`
  are the plugin interface (third-party checks also come from the entry-point group
  ``massarc.checks``); :func:`available_checks` lists them by id.

Built-in check ids: ``schema``, ``integrity``, ``time-order``, ``nonnegative``,
``conservation``, and the statistical checks ``steady-state``, ``boundary`` and
``stationary-law``.
"""

from . import checks as _builtin_checks  # noqa: F401 - registers the built-in checks
from .config import AuditSettings, ConfigError, resolve_settings
from .registry import Check, CheckContext, available_checks, get_check, register_check
from .report import AuditReport, RunReport, render
from .result import CheckResult, Where
from .runner import audit, open_for_audit

__all__ = [
    "AuditReport",
    "AuditSettings",
    "Check",
    "CheckContext",
    "CheckResult",
    "ConfigError",
    "RunReport",
    "Where",
    "audit",
    "available_checks",
    "get_check",
    "open_for_audit",
    "register_check",
    "render",
    "resolve_settings",
]
