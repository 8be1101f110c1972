"""Small HTML builders for the report page. Every datum passes through :func:`text` (or
:func:`attr`), which escape it: archives are hostile input, and a metadata string must
never become markup. Builders take already-built markup only through :class:`Markup`.
"""

from __future__ import annotations

import html
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = [
    "Cell",
    "Markup",
    "attr",
    "join",
    "key_values",
    "status_mark",
    "table",
    "tag",
    "text",
    "value",
]

#: Longest list shown whole in a cell; longer ones show their first items and a count.
_LIST_SHOWN = 8


class Markup(str):
    """A string that is already HTML (built here, with every datum escaped)."""


@dataclass(frozen=True)
class Cell:
    """A table cell's content with a class of its own (``td class="..."``)."""

    content: Any
    class_: str


def text(datum: Any) -> Markup:
    """``datum`` as escaped text (quotes too, so that it is safe in attributes)."""
    if isinstance(datum, Markup):
        return datum
    return Markup(html.escape(str(datum), quote=True))


def attr(name: str, datum: Any) -> Markup:
    """`` name="datum"`` with the datum escaped."""
    return Markup(f' {name}="{text(datum)}"')


def join(parts: Iterable[Any], sep: str = "") -> Markup:
    """Markup pieces (and escaped text) joined."""
    return Markup(sep.join(text(p) for p in parts))


def tag(name: str, *children: Any, **attrs: Any) -> Markup:
    """``<name attrs>children</name>``; attribute names use ``_`` for ``-`` and a trailing
    ``_`` for a Python keyword (``class_``); None values are left out."""
    shown = "".join(
        attr(key.rstrip("_").replace("_", "-"), val)
        for key, val in attrs.items()
        if val is not None
    )
    return Markup(f"<{name}{shown}>{join(children)}</{name}>")


def value(datum: Any) -> str:
    """A measured value or threshold as short text: 4 significant digits, long lists cut,
    nested tables as ``key = value`` pairs; ``-`` for None or not finite."""
    if isinstance(datum, np.ndarray):
        datum = datum.tolist()
    if isinstance(datum, np.generic):
        datum = datum.item()
    if datum is None or (isinstance(datum, float) and not math.isfinite(datum)):
        return "-"
    if isinstance(datum, bool):
        return "true" if datum else "false"
    if isinstance(datum, float):
        return f"{datum:.4g}"
    if isinstance(datum, Mapping):
        return "; ".join(f"{k} = {value(v)}" for k, v in datum.items())
    if isinstance(datum, list | tuple):
        shown = ", ".join(value(v) for v in datum[:_LIST_SHOWN])
        more = f", ... ({len(datum)} in all)" if len(datum) > _LIST_SHOWN else ""
        return f"[{shown}{more}]"
    return str(datum)


def key_values(items: Mapping[str, Any]) -> Markup:
    """A compact list of ``key = value`` lines (empty markup for no items)."""
    if not items:
        return Markup("")
    lines = [tag("li", tag("code", key), " = ", value(val)) for key, val in items.items()]
    return tag("ul", *lines, class_="kv")


def status_mark(status: str) -> Markup:
    """The status word in its box (colour, border pattern and the word itself)."""
    return tag("span", status, class_=f"mark mark-{status}")


def table(
    head: Sequence[Any],
    rows: Iterable[Sequence[Any]],
    *,
    caption: Any = None,
    row_headers: bool = True,
    row_classes: Sequence[str | None] | None = None,
    class_: str | None = None,
) -> Markup:
    """A table with column headers (``th scope="col"``) and, when ``row_headers``, the
    first cell of each row as its header (``th scope="row"``); wrapped in a box that
    scrolls sideways on a narrow screen."""
    heads = tag("tr", *(tag("th", h, scope="col") for h in head))
    body = []
    for k, row in enumerate(rows):
        cells = [
            tag("th", c, scope="row")
            if (j == 0 and row_headers)
            else tag("td", c.content, class_=c.class_)
            if isinstance(c, Cell)
            else tag("td", c)
            for j, c in enumerate(row)
        ]
        cls = row_classes[k] if row_classes is not None else None
        body.append(tag("tr", *cells, class_=cls))
    parts = [tag("caption", caption)] if caption is not None else []
    inner = tag("table", *parts, tag("thead", heads), tag("tbody", *body), class_=class_)
    return tag("div", inner, class_="scroll")
