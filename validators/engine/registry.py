"""The check registry: one documented contract, validated when a check is registered.

A check is a subclass of :class:`Check` with a stable ``id``. It declares the statistics
of the single pass it reads (``needs``: registered statistic names, or statistics it
brings itself in ``provides``, with their options), the preconditions the runner checks
(``requires``) and its tunable options, each an :class:`Option` with a default, a type
and a help line. ``run(ctx)`` judges the reduced statistics and returns a
:class:`~massarc.validators.engine.result.CheckResult`; it never prints, never parses
command-line options and does not raise for a failing run.

The contract is checked at registration, not at the first audit: a ``needs`` entry that
names no registered statistic, an unknown ``requires`` word, or an option without a
declared type is refused with a message naming the class, the attribute and what was
expected.

Built-in checks are listed by :func:`massarc.validators.checks.builtin_checks`;
third-party checks come from the entry-point group ``massarc.checks`` (each entry point
names a :class:`Check` subclass) or from :func:`register_check`; see
:mod:`massarc.archive.registry` for the rules (a broken plugin warns and is skipped, a
duplicate id warns and the first registered wins).
"""

from __future__ import annotations

import inspect
from abc import ABC, abstractmethod
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, ClassVar

from massarc.archive import Run
from massarc.archive.registry import Registry
from massarc.archive.scan import Statistic, available_statistics
from massarc.schema import RunMeta

from .result import CheckResult, Status, Where

__all__ = [
    "CHECKS",
    "ENTRY_POINT_GROUP",
    "OPTION_KINDS",
    "REQUIREMENTS",
    "Check",
    "CheckContext",
    "Option",
    "available_checks",
    "get_check",
    "register_check",
]

ENTRY_POINT_GROUP = "massarc.checks"
#: Words a check may list in ``requires``: a valid header; at least one committed snapshot.
REQUIREMENTS = ("metadata", "data")
#: Types an option may declare, with how a settings error describes them.
OPTION_KINDS: dict[type, str] = {
    float: "a number",
    int: "an integer",
    bool: "true or false",
    str: "a string",
}


@dataclass(frozen=True)
class Option:
    """One tunable value of a check: its default, its type and one line of help.

    ``kind`` is one of :data:`OPTION_KINDS`; an int is accepted where a float is
    declared (and kept as given), a bool never stands for a number.

    >>> Option(0.05, float, "false-alarm rate").accepts(1)
    True
    >>> Option(8, int, "shortest window").accepts(8.5)
    False
    """

    default: Any
    kind: type
    help: str

    def __post_init__(self) -> None:
        if self.kind not in OPTION_KINDS:
            known = ", ".join(k.__name__ for k in OPTION_KINDS)
            raise TypeError(f"Option kind: expected one of {known}; got {self.kind!r}")
        if not self.accepts(self.default):
            raise TypeError(
                f"Option default: expected {OPTION_KINDS[self.kind]} "
                f"({self.kind.__name__}); got {self.default!r}"
            )
        if not isinstance(self.help, str) or not self.help.strip():
            raise TypeError(f"Option help: expected a non-empty string; got {self.help!r}")

    @property
    def expected(self) -> str:
        """How an error message names the accepted values (``"a number"``...)."""
        return OPTION_KINDS[self.kind]

    def accepts(self, value: Any) -> bool:
        """True when ``value`` has the declared type (ints count as floats; bools as
        neither)."""
        if self.kind is bool:
            return isinstance(value, bool)
        if isinstance(value, bool):
            return False
        if self.kind is float:
            return isinstance(value, int | float)
        return isinstance(value, self.kind)


@dataclass
class CheckContext:
    """What a check sees: the run, its metadata, the reduced statistics, its options.

    ``stats`` maps statistic names (as in the check's ``needs``) to the results of the
    single pass. ``options`` holds every declared option, defaults overridden by the
    settings (read-only; the runner fills it with :meth:`Check.option_values`). ``cache``
    is shared by all checks of one run, for derived analyses several checks use (the
    stationary window, for instance); use :meth:`derived` to fill it once. ``faults``
    lists the chunks the pass could not read (:class:`massarc.archive.scan.ChunkFault`),
    in run order.
    """

    run: Run
    meta: RunMeta | None
    stats: Mapping[str, Any]
    options: Mapping[str, Any]
    cache: dict[str, Any] = field(default_factory=dict)
    faults: list[Any] = field(default_factory=list)

    def __post_init__(self) -> None:
        self.options = MappingProxyType(dict(self.options))

    def derived(self, key: str, compute: Callable[[CheckContext], Any]) -> Any:
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
        ``{statistic name: statistic options}`` of the single pass this check reads: names
        of registered statistics or of statistics in ``provides``.
    provides
        Statistic classes this check brings itself (a statistic no other check uses);
        they are validated with the check and used for its ``needs`` under their names.
    options
        ``{name: Option(default, kind, help)}``: the check's tunable thresholds; the
        settings (``[tool.massarc.checks.<id>]``, ``--set``) override the defaults.
    requires
        Preconditions the runner checks before calling :meth:`run`; when one fails the
        result is ``skip`` with the reason: ``"metadata"`` (a valid header) and ``"data"``
        (at least one committed snapshot). None (the default) means ``("data",)`` for a
        check with ``needs`` and nothing otherwise.
    """

    id: ClassVar[str]
    description: ClassVar[str]
    needs: ClassVar[Mapping[str, Mapping[str, Any]]] = {}
    provides: ClassVar[tuple[type[Statistic], ...]] = ()
    options: ClassVar[Mapping[str, Option]] = {}
    requires: ClassVar[tuple[str, ...] | None] = None

    @abstractmethod
    def run(self, ctx: CheckContext) -> CheckResult:
        """Judge one run."""

    @classmethod
    def option_values(cls, settings: Mapping[str, Any] | None = None) -> Mapping[str, Any]:
        """Every declared option: the defaults, overridden by ``settings`` (read-only).

        Raises :class:`ValueError` for an undeclared option or a value of the wrong type
        (the settings parser reports those with the file and key first).
        """
        values = {name: opt.default for name, opt in cls.options.items()}
        for name, value in (settings or {}).items():
            opt = cls.options.get(name)
            if opt is None:
                known = ", ".join(cls.options) or "(this check has no options)"
                raise ValueError(f"{cls.id}: expected one of {known}; got {name!r}")
            if not opt.accepts(value):
                raise ValueError(f"{cls.id}.{name}: expected {opt.expected}; got {value!r}")
            values[name] = value
        return MappingProxyType(values)

    @classmethod
    def statistic(cls, name: str) -> type[Statistic] | None:
        """The statistic class behind ``name`` in ``needs`` (its own first), or None."""
        for stat in cls.provides:
            if stat.name == name:
                return stat
        return available_statistics().get(name)

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


# contract ------------------------------------------------------------------------------


def _validate(cls: Any, origin: str) -> None:
    """Refuse (``TypeError``) a class that breaks the check contract; ``origin`` names it."""
    if not (isinstance(cls, type) and issubclass(cls, Check)):
        raise TypeError(f"{origin}: expected a subclass of massarc.validators.Check; got {cls!r}")
    name = cls.__name__
    for attr in ("id", "description"):
        value = getattr(cls, attr, None)
        if not isinstance(value, str) or not value:
            raise TypeError(f"{origin}: expected {name}.{attr} to be a non-empty string")
    if inspect.isabstract(cls):
        raise TypeError(f"{origin}: expected {name} to define run(ctx)")
    _validate_provides(cls, origin)
    _validate_needs(cls, origin)
    _validate_requires(cls, origin)
    _validate_options(cls, origin)


def _validate_provides(cls: type[Check], origin: str) -> None:
    from massarc.archive.scan import STATISTICS  # looked up now: tests swap registries

    if not isinstance(cls.provides, tuple):
        raise TypeError(
            f"{origin}: expected {cls.__name__}.provides to be a tuple of Statistic classes; "
            f"got {cls.provides!r}"
        )
    for stat in cls.provides:
        STATISTICS.validate(stat, f"{origin}: {cls.__name__}.provides")


def _validate_needs(cls: type[Check], origin: str) -> None:
    needs = cls.needs
    if not isinstance(needs, Mapping):
        raise TypeError(
            f"{origin}: expected {cls.__name__}.needs to be a mapping "
            f"{{statistic name: options}}; got {needs!r}"
        )
    for stat, opts in needs.items():
        if not isinstance(opts, Mapping):
            raise TypeError(
                f"{origin}: expected {cls.__name__}.needs[{stat!r}] to be a mapping of "
                f"statistic options; got {opts!r}"
            )
        if cls.statistic(stat) is None:
            known = [*available_statistics(), *(s.name for s in cls.provides)]
            raise TypeError(
                f"{origin}: {cls.__name__}.needs names the statistic {stat!r}, which is not "
                f"registered; expected one of {', '.join(dict.fromkeys(known)) or '(none)'}"
            )


def _validate_requires(cls: type[Check], origin: str) -> None:
    req = cls.requires
    if req is None:
        return
    if not isinstance(req, tuple | list):
        raise TypeError(
            f"{origin}: expected {cls.__name__}.requires to be a tuple of words; got {req!r}"
        )
    for word in req:
        if word not in REQUIREMENTS:
            raise TypeError(
                f"{origin}: {cls.__name__}.requires: expected words among "
                f"{', '.join(REQUIREMENTS)}; got {word!r}"
            )


def _validate_options(cls: type[Check], origin: str) -> None:
    if not isinstance(cls.options, Mapping):
        raise TypeError(
            f"{origin}: expected {cls.__name__}.options to be a mapping {{name: Option}}; "
            f"got {cls.options!r}"
        )
    for name, opt in cls.options.items():
        if not isinstance(opt, Option):
            raise TypeError(
                f"{origin}: {cls.__name__}.options[{name!r}]: expected "
                f"Option(default, kind, help) declaring its type; got {opt!r}"
            )


# registry ------------------------------------------------------------------------------


def _builtin_checks() -> tuple[type[Check], ...]:
    from massarc.validators.checks import builtin_checks

    return builtin_checks()


#: The check registry: built-ins, then plugins of the entry-point group ``massarc.checks``.
CHECKS: Registry[Check] = Registry("check", "id", ENTRY_POINT_GROUP, _validate, _builtin_checks)


def register_check(cls: type[Check]) -> type[Check]:
    """Register a third-party check class (usable as a decorator); validates the contract.

    Raises :class:`TypeError` naming the class and attribute when the contract is broken.
    Listing the class in the entry-point group ``massarc.checks`` as well is fine (and
    lets ``massarc check`` find it without importing the module first).
    """
    return CHECKS.register(cls)


def available_checks() -> Mapping[str, type[Check]]:
    """Built-in then plugin checks by id (read-only; the same mapping on every call)."""
    return CHECKS.available()


def get_check(check_id: str) -> type[Check]:
    """The check class registered under ``check_id``; the error lists the known ids."""
    return CHECKS.get(check_id)
