"""Readable, one-line messages for invalid metadata.

A pydantic ``ValidationError`` becomes a :class:`MetadataError` whose lines read
``lattice.boundary: expected one of periodic, reflecting, open; got "ring"``.
"""

from __future__ import annotations

import json
import re
from typing import Any

from pydantic import ValidationError

__all__ = ["MetadataError", "validation_problems"]

_FAMILIES = {"zrp", "cmam", "custom"}


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


def _path(loc: tuple[int | str, ...]) -> str:
    out = ""
    prev: int | str | None = None
    for item in loc:
        if isinstance(item, int):
            out += f"[{item}]"
        elif prev == "model" and item in _FAMILIES:
            pass  # the discriminated-union tag pydantic inserts; not a key of the file
        elif "[" in item or item.startswith("function-"):
            pass  # union-member labels such as "list[float]"
        else:
            out += ("." if out else "") + item
        prev = item
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
        return "required key family is missing (one of zrp, cmam, custom)"
    simple = {
        "int_type": "an integer",
        "float_type": "a number",
        "string_type": "a string",
        "bool_type": "true or false",
        "list_type": "a list",
        "dict_type": "a table",
        "model_type": "a table",
        "model_attributes_type": "a table",
        "int_from_float": "an integer",
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
    """One ``key.path: reason`` line per error of a pydantic ``ValidationError``.

    A custom error whose message already starts with its own key (``boundary: ...``)
    is not prefixed twice.
    """
    lines: list[str] = []
    for err in exc.errors(include_url=False):
        reason = _reason(err)  # may extend err["loc"] (the discriminator key)
        path = _path(tuple(err["loc"]))
        head = reason.split(":", 1)[0]
        if ":" in reason and " " not in head and head:
            # the validator named the key itself (e.g. "boundary: ..."); join the paths
            path = head if path == "(top level)" else f"{path}.{head}"
            if path.endswith(f".{head}.{head}"):
                path = path[: -len(head) - 1]
            reason = reason.split(":", 1)[1].strip()
        lines.append(f"{path}: {reason}")
    return list(dict.fromkeys(lines))
