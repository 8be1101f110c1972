"""The check registry: one documented contract, built-ins registered like plugins.

A check is a subclass of :class:`Check` with a stable ``id``. It declares the statistics
of the single pass it needs (``needs``, names of :mod:`massarc.archive.scan` statistics
with their options) and its tunable options with defaults (``options``). ``run(ctx)``
judges the reduced statistics and returns a :class:`~massarc.validators.result.CheckResult`;
it never prints, never parses command-line options and does not raise for a failing run.

Third-party checks register through the entry-point group ``massarc.checks``; each entry
point names a :class:`Check` subclass. They are loaded lazily, the first time the registry
is listed; a broken plugin gives a warning, not a crash.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass, field
from importlib.metadata import entry_points
from typing import Any, ClassVar

from massarc.archive import Run
from massarc.archive.plugins import load_plugins
from massarc.schema import RunMeta

from .result import CheckResult, Status, Where

__all__ = [
    "ENTRY_POINT_GROUP",
    "Check",
    "CheckContext",
    "available_checks",
    "get_check",
    "register_check",
]

ENTRY_POINT_GROUP = "massarc.checks"


@dataclass
class CheckContext:
    """What a check sees: the run, its metadata, the reduced statistics, its options.

    ``stats`` maps statistic names to the results of the single pass. ``cache`` is shared
    by all checks of one run, for derived analyses several checks use (the stationary
    window, for instance); use :meth:`derived` to fill it once. ``faults`` lists the chunks
    the pass could not read (:class:`massarc.archive.scan.ChunkFault`), in run order.
    """

    run: Run
    meta: RunMeta | None
    stats: Mapping[str, Any]
    options: Mapping[str, Any]
    cache: dict[str, Any] = field(default_factory=dict)
    faults: list[Any] = field(default_factory=list)

    def derived(self, key: str, compute: Any) -> Any:
        """Return ``cache[key]``, computing it with ``compute(self)`` the first time."""
        if key not in self.cache:
            self.cache[key] = compute(self)
        return self.cache[key]


class Check(ABC):
    """Base class of every check.

    Class attributes
    ----------------
    id
        Stable identifier (part of the interface: reports and configuration use it).
    description
        One line shown by ``massarc check --list``.
    needs
        ``{statistic name: options}`` of the single pass this check reads.
    options
        Tunable options and thresholds with their defaults; configuration may override.
    requires
        Preconditions the runner checks before calling :meth:`run`; when one fails the
        result is ``skip`` with the reason: ``"metadata"`` (a valid header) and ``"data"``
        (at least one committed snapshot). None (the default) means ``("data",)`` for a
        check with ``needs`` and nothing otherwise.
    """

    id: ClassVar[str]
    description: ClassVar[str]
    needs: ClassVar[Mapping[str, Mapping[str, Any]]] = {}
    options: ClassVar[Mapping[str, Any]] = {}
    requires: ClassVar[tuple[str, ...] | None] = None

    @abstractmethod
    def run(self, ctx: CheckContext) -> CheckResult:
        """Judge one run."""

    # helpers for building results ------------------------------------------------------

    def result(
        self,
        status: Status,
        message: str,
        *,
        values: Mapping[str, Any] | None = None,
        thresholds: Mapping[str, Any] | None = None,
        where: Where | Mapping[str, Any] | None = None,
    ) -> CheckResult:
        """A :class:`CheckResult` for this check's id."""
        if isinstance(where, Mapping):
            where = Where(**where)
        return CheckResult(
            id=self.id,
            status=status,
            message=message,
            values=dict(values or {}),
            thresholds=dict(thresholds or {}),
            where=where,
        )


_BUILTIN: dict[str, type[Check]] = {}
_PLUGINS: dict[str, type[Check]] | None = None


def register_check(cls: type[Check]) -> type[Check]:
    """Register a built-in check class (usable as a decorator); validates the contract."""
    _validate(cls, origin=cls.__module__)
    if cls.id in _BUILTIN and _BUILTIN[cls.id] is not cls:
        raise ValueError(f"check id {cls.id!r} is already registered by {_BUILTIN[cls.id]}")
    _BUILTIN[cls.id] = cls
    return cls


def _validate(cls: Any, origin: str) -> None:
    if not (isinstance(cls, type) and issubclass(cls, Check)):
        raise TypeError(f"{origin}: expected a subclass of massarc.validators.Check; got {cls!r}")
    for attr in ("id", "description"):
        if not isinstance(getattr(cls, attr, None), str) or not getattr(cls, attr):
            raise TypeError(f"{origin}: expected {cls.__name__}.{attr} to be a non-empty string")
    if not isinstance(cls.needs, Mapping) or not isinstance(cls.options, Mapping):
        raise TypeError(f"{origin}: expected {cls.__name__}.needs and .options to be mappings")


def _load_plugins() -> dict[str, type[Check]]:
    global _PLUGINS
    if _PLUGINS is None:
        _PLUGINS = load_plugins(
            entry_points(group=ENTRY_POINT_GROUP),
            kind="check",
            key="id",
            validate=_validate,
            taken=_BUILTIN,
        )
    return _PLUGINS


def available_checks() -> dict[str, type[Check]]:
    """Built-in then plugin checks, by id, in registration order."""
    return {**_BUILTIN, **_load_plugins()}


def get_check(check_id: str) -> type[Check]:
    """The check class registered under ``check_id``; the error lists the known ids."""
    checks = available_checks()
    if check_id not in checks:
        known = ", ".join(checks) or "(none)"
        raise KeyError(f"unknown check {check_id!r}; known checks: {known}")
    return checks[check_id]
