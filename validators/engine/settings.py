"""Audit settings from files and the command line.

Audit rules come from the person running the audit, never from the data: a file that
travels with the runs (inside a run or beside it in a downloaded collection) is never
read. The file that applies is ``--config FILE`` when given, else the nearest
``massarc.toml`` (keys at its top level) or ``pyproject.toml`` with a ``[tool.massarc]``
table, searching from the current directory upward (``massarc.toml`` wins when both are in
one directory). Only one file is read, and the report names it. Keys::

    [tool.massarc]
    skip = ["steady-state"]          # check ids not to run
    strict = true                    # warnings count as failures
    [tool.massarc.checks.conservation]
    tolerance = 0                    # per-check options (see ``massarc check --list``)

Command-line options override the file: ``--strict``/``--no-strict`` replace ``strict``,
``--skip`` adds to ``skip``, ``--only`` runs exactly the checks it names (even those the
file skips), and
``--set ID.OPTION=VALUE`` replaces one option. Unknown check ids, option names or keys
are errors naming the file and key.

Given the locations audited, :func:`resolve_settings` also lists the configuration files
found inside those runs and collections (:func:`travelling_configs`; a file the upward
search would find there is passed over too): they are ignored, and the report and the
command line name each one. ``origins`` records where every option that is not its default
came from (the file, or ``--set``).
"""

from __future__ import annotations

import os
import tomllib
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from massarc.archive.store import local_path
from massarc.schema import MetadataError, apply_overrides

from .registry import Check, Option, available_checks

__all__ = [
    "FILE_NAME",
    "AuditSettings",
    "ConfigError",
    "find_config",
    "load_settings",
    "parse_options",
    "parse_settings",
    "resolve_settings",
    "travelling_configs",
]

#: Name of a project's own configuration file (looked for from the current directory up).
FILE_NAME = "massarc.toml"
_KEYS = ("checks", "skip", "strict")


class ConfigError(ValueError):
    """Configuration that cannot be used; the message names the file (or option) and key."""


class AuditSettings(BaseModel):
    """Which checks run, with which options, and whether warnings fail (frozen)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    skip: tuple[str, ...] = ()
    only: tuple[str, ...] | None = None
    strict: bool = False
    options: dict[str, dict[str, Any]] = Field(default_factory=dict)
    source: str | None = Field(None, description="The file the settings came from.")
    origins: dict[str, dict[str, str]] = Field(
        default_factory=dict,
        description="check id -> option -> where its value came from (a file or --set).",
    )
    ignored: tuple[str, ...] = Field(
        (), description="Configuration files inside the audited runs and collections, not read."
    )


def _known(checks: Mapping[str, type[Check]]) -> str:
    return ", ".join(checks) or "(none)"


def _check_ids(
    ids: Iterable[Any], checks: Mapping[str, type[Check]], where: str
) -> tuple[str, ...]:
    out = []
    for cid in ids:
        if not isinstance(cid, str) or cid not in checks:
            raise ConfigError(f"{where}: expected one of {_known(checks)}; got {cid!r}")
        out.append(cid)
    return tuple(dict.fromkeys(out))


def _option_value(value: Any, option: Option, where: str) -> Any:
    """``value`` if it has the option's declared type (an int where a float is declared
    is fine), else an error naming ``where``."""
    if not option.accepts(value):
        raise ConfigError(f"{where}: expected {option.expected}; got {value!r}")
    return value


def parse_options(
    options: Mapping[str, Any],
    checks: Mapping[str, type[Check]] | None = None,
    where: str = "options",
    sep: str = ".",
) -> dict[str, dict[str, Any]]:
    """Validate ``{check id: {option: value}}`` against the checks' declared options (their
    names and types); errors name ``where`` + ``sep`` + the key path.

    >>> parse_options({"conservation": {"tolerance": 2}})
    {'conservation': {'tolerance': 2}}
    """
    checks = available_checks() if checks is None else checks
    out: dict[str, dict[str, Any]] = {}
    for cid, opts in options.items():
        if cid not in checks:
            raise ConfigError(f"{where}: expected a check id, one of {_known(checks)}; got {cid!r}")
        if not isinstance(opts, Mapping):
            raise ConfigError(f"{where}{sep}{cid}: expected a table of options; got {opts!r}")
        declared = checks[cid].options
        for name, value in opts.items():
            if name not in declared:
                known = ", ".join(declared) or "(this check has no options)"
                raise ConfigError(f"{where}{sep}{cid}: expected one of {known}; got {name!r}")
            out.setdefault(cid, {})[name] = _option_value(
                value, declared[name], f"{where}{sep}{cid}.{name}"
            )
    return out


def parse_settings(
    data: Mapping[str, Any],
    source: str | None = None,
    prefix: str = "",
    checks: Mapping[str, type[Check]] | None = None,
) -> AuditSettings:
    """Validate a settings table (the contents of ``[tool.massarc]`` or ``massarc.toml``)."""
    checks = available_checks() if checks is None else checks
    head = f"{source}: " if source else ""
    for key in data:
        if key not in _KEYS:
            raise ConfigError(
                f"{head}{prefix}{key}: expected one of {', '.join(_KEYS)}; got {key!r}"
            )
    skip = data.get("skip", [])
    if not isinstance(skip, list):
        raise ConfigError(f"{head}{prefix}skip: expected a list of check ids; got {skip!r}")
    strict = data.get("strict", False)
    if not isinstance(strict, bool):
        raise ConfigError(f"{head}{prefix}strict: expected true or false; got {strict!r}")
    table = data.get("checks", {})
    if not isinstance(table, Mapping):
        raise ConfigError(f"{head}{prefix}checks: expected a table; got {table!r}")
    options = parse_options(table, checks, f"{head}{prefix}checks")
    where = source or "settings"
    return AuditSettings(
        skip=_check_ids(skip, checks, f"{head}{prefix}skip"),
        strict=strict,
        options=options,
        source=source,
        origins={cid: dict.fromkeys(opts, where) for cid, opts in options.items()},
    )


def load_settings(
    path: str | Path, checks: Mapping[str, type[Check]] | None = None
) -> AuditSettings:
    """Read settings from a ``pyproject.toml`` (``[tool.massarc]``) or any other TOML file
    (top level)."""
    p = Path(path)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(f"{p}: cannot read the configuration ({exc.strerror})") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{p}: invalid TOML ({exc})") from None
    if p.name == "pyproject.toml":
        tool = data.get("tool", {})
        table = tool.get("massarc", {}) if isinstance(tool, Mapping) else {}
        if not isinstance(table, Mapping):
            raise ConfigError(f"{p}: tool.massarc: expected a table; got {table!r}")
        return parse_settings(table, str(p), "tool.massarc.", checks)
    return parse_settings(data, str(p), "", checks)


def _has_tool_table(path: Path) -> bool:
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, tomllib.TOMLDecodeError, UnicodeDecodeError):
        return True  # let load_settings report the problem with the file's name
    tool = data.get("tool")
    return isinstance(tool, Mapping) and "massarc" in tool


def _configs_in(d: Path) -> list[Path]:
    """``massarc.toml``, and ``pyproject.toml`` with ``[tool.massarc]``, directly in ``d``."""
    found = []
    own = d / FILE_NAME
    if own.is_file():
        found.append(own)
    candidate = d / "pyproject.toml"
    if candidate.is_file() and _has_tool_table(candidate):
        found.append(candidate)
    return found


def find_config(
    cwd: str | Path | None = None, exclude: Iterable[Path] = (), passed: list[Path] | None = None
) -> Path | None:
    """The configuration file of the auditor's project: the nearest ``massarc.toml``, or
    ``pyproject.toml`` with ``[tool.massarc]``, from ``cwd`` (default: the current
    directory) upward; None if there is none. A file inside one of the directories
    ``exclude`` (the audited runs and collections) is passed over, and appended to
    ``passed``: the search goes on above them."""
    here = Path(cwd) if cwd is not None else Path.cwd()
    fenced = [Path(e).resolve() for e in exclude]
    for d in (here.resolve(), *here.resolve().parents):
        for candidate in _configs_in(d):
            if any(d == f or f in d.parents for f in fenced):
                if passed is not None:
                    passed.append(candidate)
                continue
            return candidate
    return None


def _audited_dirs(locations: Iterable[Any]) -> list[Path]:
    out = []
    for location in locations:
        path = local_path(location) if isinstance(location, str | os.PathLike) else None
        if path is not None and path.is_dir():
            out.append(path)
    return out


def travelling_configs(locations: Iterable[Any]) -> list[Path]:
    """Configuration files that travel with the runs: in each audited local directory (a run
    or a collection) and in the directories below a collection down to its runs (the walk
    does not enter a Zarr node below the top). None of them is ever read.

    >>> travelling_configs(["samples/depot-ring.zarr"])
    []
    """
    found: list[Path] = []
    for root in _audited_dirs(locations):
        for here, dirs, files in os.walk(root):
            dirs.sort()
            if "zarr.json" in files and Path(here) != root:
                dirs.clear()
            found.extend(_configs_in(Path(here)))
    return list(dict.fromkeys(found))


def _parse_sets(items: Iterable[str], checks: Mapping[str, type[Check]]) -> dict:
    out: dict[str, dict[str, Any]] = {}
    for item in items:
        key = item.partition("=")[0].strip()
        if "=" not in item or key.count(".") != 1:
            raise ConfigError(f"--set {item!r}: expected ID.OPTION=VALUE")
        try:
            parsed = apply_overrides({}, [item])  # values are TOML literals, else strings
        except MetadataError as exc:
            raise ConfigError(f"--set {item!r}: {'; '.join(exc.problems)}") from None
        for cid, opts in parsed.items():
            out.setdefault(cid, {}).update(opts)
    return parse_options(out, checks, "--set", " ")


def resolve_settings(
    *,
    config: str | Path | None = None,
    cwd: str | Path | None = None,
    skip: Iterable[str] = (),
    only: Iterable[str] = (),
    strict: bool | None = None,
    sets: Iterable[str] = (),
    checks: Mapping[str, type[Check]] | None = None,
    runs: Iterable[Any] = (),
) -> AuditSettings:
    """Settings of one ``massarc check`` call: the file that applies, then the command line.
    ``runs``: the locations audited; configuration files inside them are never read and
    are listed in ``ignored``.

    >>> s = resolve_settings(cwd="/", skip=["schema"], sets=["conservation.tolerance=1"])
    >>> s.skip, s.options
    (('schema',), {'conservation': {'tolerance': 1}})
    """
    checks = available_checks() if checks is None else checks
    runs = list(runs)
    passed: list[Path] = []
    if config is not None:
        path: Path | None = Path(config)
    else:
        path = find_config(cwd, exclude=_audited_dirs(runs), passed=passed)
    if config is not None and not Path(config).is_file():
        raise ConfigError(f"{config}: no such configuration file")
    base = load_settings(path, checks) if path is not None else AuditSettings()
    options = {cid: dict(opts) for cid, opts in base.options.items()}
    origins = {cid: dict.fromkeys(opts, str(path)) for cid, opts in base.options.items()}
    for cid, opts in _parse_sets(sets, checks).items():
        options.setdefault(cid, {}).update(opts)
        origins.setdefault(cid, {}).update(dict.fromkeys(opts, "--set"))
    used = path.resolve() if path is not None else None
    found = dict.fromkeys([*passed, *travelling_configs(runs)])
    ignored = [str(p) for p in found if p.resolve() != used]  # --config may name one: read
    only_ids = _check_ids(only, checks, "--only")
    kept = tuple(cid for cid in base.skip if cid not in only_ids)  # --only names win
    return AuditSettings(
        skip=tuple(dict.fromkeys((*kept, *_check_ids(skip, checks, "--skip")))),
        only=only_ids or None,
        strict=base.strict if strict is None else strict,
        options=options,
        source=base.source,
        origins=origins,
        ignored=tuple(ignored),
    )
