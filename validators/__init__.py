"""massarc.validators: audit runs against what they claim.

* :func:`audit` runs the registered checks on runs and collections, from one pass over
  each run's chunks, and returns an :class:`AuditReport` (render it with
  :func:`~massarc.validators.report.render`: table, JSON or JUnit XML);
* :class:`Check`, :class:`CheckContext`, :class:`CheckResult`, :class:`Option` and
  :func:`register_check` are the plugin interface (third-party checks also come from the
  entry-point group ``massarc.checks``); :func:`available_checks` lists them by id.

The stationary window is public too, for the summaries and other callers:
:func:`stationary_window` takes a :class:`CheckContext` whose ``stats`` hold the
``snapshots`` statistic and returns a :class:`Window` (where the stationary part of the run
starts, its length, its thinning stride, whether it was found); :class:`WindowSettings`
holds its thresholds (the ``steady-state`` check's options).

Layout: :mod:`.engine` is the framework (registry, runner, settings, result),
:mod:`.report` the renderings, :mod:`.checks` the built-in checks (one module, or one
package when a check brings its own statistic or test), :mod:`.analysis` the analyses
several checks share.

Built-in check ids: ``schema``, ``integrity``, ``time-order``, ``nonnegative``,
``conservation``, and the statistical checks ``steady-state``, ``boundary``,
``stationary-law``, ``drift`` and ``independence``.
"""

from .analysis.window import Window, WindowSettings, stationary_window
from .engine.registry import (
    Check,
    CheckContext,
    Option,
    available_checks,
    get_check,
    register_check,
)
from .engine.result import CheckResult, Where
from .engine.runner import audit, open_for_audit
from .engine.settings import AuditSettings, ConfigError, resolve_settings
from .report import AuditReport, RunReport, render

__all__ = [
    "AuditReport",
    "AuditSettings",
    "Check",
    "CheckContext",
    "CheckResult",
    "ConfigError",
    "Option",
    "RunReport",
    "Where",
    "Window",
    "WindowSettings",
    "audit",
    "available_checks",
    "get_check",
    "open_for_audit",
    "register_check",
    "render",
    "resolve_settings",
    "stationary_window",
]
