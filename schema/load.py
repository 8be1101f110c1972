"""Read metadata from TOML or JSON, apply ``key.path=value`` overrides, validate.

>>> meta = parse_metadata({"model": {"family": "cmam", "diffusion": 1.0, "chipping": 2.0},
...                        "lattice": {"sites": [64], "boundary": "periodic"},
...                        "run": {"regime": "transient"}})
>>> meta.lattice.boundary
('periodic',)
"""

from __future__ import annotations

import json
import tomllib
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from .errors import MetadataError, validation_problems
from .models import RunMeta

__all__ = [
    "MAX_DEPTH",
    "apply_overrides",
    "load_json",
    "load_metadata",
    "parse_metadata",
    "read_metadata_file",
]

#: Deepest nesting of tables and lists accepted in metadata (the models use 4 levels;
#: ``extra`` and ``model.parameters`` are free, but nothing real nests 64 deep).
MAX_DEPTH = 64


def _depth_problem(data: Any) -> str | None:
    """A message when ``data`` nests tables or lists deeper than :data:`MAX_DEPTH`."""
    todo = [(data, 1)]
    while todo:
        node, depth = todo.pop()
        if isinstance(node, dict | list):
            if depth > MAX_DEPTH:
                return f"expected tables and lists nested at most {MAX_DEPTH} deep; got deeper"
            todo.extend((v, depth + 1) for v in (node.values() if isinstance(node, dict) else node))
    return None


def load_json(text: str | bytes) -> Any:
    """``json.loads`` that refuses absurd nesting with a ``ValueError`` (one line), instead
    of a ``RecursionError`` from the parser or from whatever walks the result later.

    >>> load_json('{"a": [1, 2]}')
    {'a': [1, 2]}
    >>> load_json("[" * 100 + "]" * 100)
    Traceback (most recent call last):
    ...
    ValueError: expected tables and lists nested at most 64 deep; got deeper
    """
    try:
        data = json.loads(text)
    except RecursionError:
        raise ValueError(
            f"expected tables and lists nested at most {MAX_DEPTH} deep; got deeper"
        ) from None
    problem = _depth_problem(data)
    if problem is not None:
        raise ValueError(problem)
    return data


def read_metadata_file(path: str | Path) -> dict[str, Any]:
    """Parse a ``.toml`` or ``.json`` file into a plain dict (no validation).

    Raises :class:`MetadataError` naming the file (and line, for syntax errors).
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise MetadataError([f"cannot read metadata file ({exc.strerror})"], str(p)) from None
    except UnicodeDecodeError as exc:  # found by fuzzing (docs/fuzzing.md)
        raise MetadataError(
            [f"expected UTF-8 text; got byte 0x{exc.object[exc.start]:02x} at offset {exc.start}"],
            str(p),
        ) from None
    if p.suffix.lower() == ".json" or (p.suffix.lower() != ".toml" and text.lstrip()[:1] == "{"):
        try:
            data = load_json(text)
        except json.JSONDecodeError as exc:
            raise MetadataError([f"line {exc.lineno}: invalid JSON ({exc.msg})"], str(p)) from None
        except ValueError as exc:
            raise MetadataError([str(exc)], str(p)) from None
    else:
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise MetadataError([f"invalid TOML ({exc})"], str(p)) from None
        except RecursionError:
            data = [[]] * (MAX_DEPTH + 1)  # reported as too deep just below
        problem = _depth_problem(data)
        if problem is not None:
            raise MetadataError([problem], str(p))
    if not isinstance(data, dict):
        raise MetadataError(
            [f"expected a table at the top level; got {type(data).__name__}"], str(p)
        )
    return data


def _parse_value(text: str) -> Any:
    """A ``--set`` value: a TOML literal (number, bool, string, list), else the raw string."""
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def apply_overrides(data: Mapping[str, Any], overrides: Iterable[str]) -> dict[str, Any]:
    """Return a copy of ``data`` with each ``key.path=value`` applied.

    >>> apply_overrides({"run": {"regime": "stationary"}}, ["run.regime=transient"])
    {'run': {'regime': 'transient'}}
    """
    out: dict[str, Any] = json.loads(json.dumps(data, default=str))
    for item in overrides:
        key, sep, raw = item.partition("=")
        if not sep or not key.strip():
            raise MetadataError([f"--set {item!r}: expected key.path=value"])
        parts = key.strip().split(".")
        node = out
        for part in parts[:-1]:
            nxt = node.setdefault(part, {})
            if not isinstance(nxt, dict):
                raise MetadataError([f"--set {item!r}: {part} is not a table"])
            node = nxt
        node[parts[-1]] = _parse_value(raw.strip())
    return out


def parse_metadata(data: Mapping[str, Any], source: str | None = None) -> RunMeta:
    """Validate a plain dict into :class:`RunMeta`; raise :class:`MetadataError` otherwise."""
    try:
        return RunMeta.model_validate(dict(data))
    except ValidationError as exc:
        raise MetadataError(validation_problems(exc), source) from None


def load_metadata(path: str | Path, overrides: Iterable[str] = ()) -> RunMeta:
    """Read, override and validate a metadata file in one step."""
    return parse_metadata(apply_overrides(read_metadata_file(path), overrides), str(path))
