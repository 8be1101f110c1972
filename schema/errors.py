"""Readable, one-line messages for invalid metadata.

A pydantic ``ValidationError`` becomes a :class:`MetadataError` whose lines read
``lattice.boundary: expected one of periodic, reflecting, open; got "ring"``. The key path
comes from pydantic's error location only (the models locate every error, cross-field ones
included, at the key it is about); the reason from the error type and its context.
"""

from __future__ import annotations

import json
import re
from typing import Any

from pydantic import ValidationError

from .models import FAMILIES

__all__ = ["MetadataError", "key_path", "validation_problems"]


class MetadataError(ValueError):
    """Metadata that does not satisfy the schema, or that contradicts the data.

    ``problems`` holds one ``key.path: reason`` string per problem; ``source`` names the
    file (or archive) the metadata came from.
    """

    def __init__(self, problems: list[str], source: str | None = None) -> None:
        self.problems = list(problems)
        self.source = source
        prefix = f"{source}: " if source else ""
        super().__init__(prefix + "; ".join(self.problems))


def _got(value: Any) -> str:
    try:
        return json.dumps(value, default=str)
    except (TypeError, ValueError):  # pragma: no cover - json.dumps(default=str) rarely fails
        return repr(value)


def key_path(loc: tuple[int | str, ...]) -> list[int | str]:
    """The keys of the file in a pydantic error location, without the labels pydantic adds.

    >>> key_path(("metadata", "model", "zrp", "right_probability"))
    ['metadata', 'model', 'right_probability']
    """
    out: list[int | str] = []
    for item in loc:
        if isinstance(item, str) and out and out[-1] == "model" and item in FAMILIES:
            continue  # the discriminated-union tag pydantic inserts
        if isinstance(item, str) and ("[" in item or item.startswith("function-")):
            continue  # union-member labels such as "list[float]"
        out.append(item)
    return out


def _path(loc: tuple[int | str, ...]) -> str:
    out = ""
    for item in key_path(loc):
        if isinstance(item, int):
            out += f"[{item}]"
        else:
            out += ("." if out else "") + item
    return out or "(top level)"


_QUOTED = re.compile(r"'([^']*)'")


def _reason(err: dict[str, Any]) -> str:
    kind = err["type"]
    ctx = err.get("ctx") or {}
    value = err.get("input")
    if kind == "missing":
        return "required key is missing"
    if kind == "extra_forbidden":
        return "unknown key (not part of the schema; put free entries under [extra])"
    if kind == "literal_error":
        choices = ", ".join(_QUOTED.findall(str(ctx.get("expected", ""))))
        return f"expected one of {choices}; got {_got(value)}"
    if kind == "union_tag_invalid":
        err["loc"] = (*tuple(err["loc"]), str(ctx.get("discriminator", "family")).strip("'"))
        choices = ", ".join(_QUOTED.findall(str(ctx.get("expected_tags", ""))))
        return f"expected one of {choices}; got {_got(ctx.get('tag', value))}"
    if kind == "union_tag_not_found":
        return f"required key family is missing (one of {', '.join(FAMILIES)})"
    simple = {
        "int_type": "an integer",
        "float_type": "a number",
        "string_type": "a string",
        "bool_type": "true or false",
        "list_type": "a list",
        "tuple_type": "a list",
        "dict_type": "a table",
        "model_type": "a table",
        "model_attributes_type": "a table",
        "int_from_float": "an integer",
        "finite_number": "a finite number",
    }
    if kind in simple:
        return f"expected {simple[kind]}; got {_got(value)}"
    bounds = {
        "greater_than": ">",
        "greater_than_equal": ">=",
        "less_than": "<",
        "less_than_equal": "<=",
    }
    if kind in bounds:
        limit = next(iter(ctx.values()), "?")
        return f"expected a value {bounds[kind]} {limit}; got {_got(value)}"
    if kind in {"too_short", "too_long"}:
        lo, hi = ctx.get("min_length"), ctx.get("max_length")
        want = f"at least {lo}" if kind == "too_short" else f"at most {hi}"
        return f"expected {want} entries; got {ctx.get('actual_length', '?')}"
    msg = str(err.get("msg", kind))
    return msg.removeprefix("Value error, ")


def validation_problems(exc: ValidationError) -> list[str]:
    """One ``key.path: reason`` line per error of a pydantic ``ValidationError``."""
    lines: list[str] = []
    for err in exc.errors(include_url=False):
        reason = _reason(err)  # may extend err["loc"] (the discriminator key)
        lines.append(f"{_path(tuple(err['loc']))}: {reason}")
    return list(dict.fromkeys(lines))
