"""The check reference (``docs/checks.md``), generated from the check registry.

For every registered check, in registry order: its id and one-line description, its null
hypothesis and what its ``where`` points at (the ``Null hypothesis`` and ``Where``
sections of the check class's docstring), when it runs (``requires``), the statistics of
the single pass it reads (``needs``), and its options with their defaults, types and help
(the :class:`~massarc.validators.Option` declarations). Regenerate the page with::

    python -m massarc.validators.reference > docs/checks.md

A test regenerates it and compares it with the committed page.

>>> "## `conservation`" in check_reference()
True
"""

from __future__ import annotations

import inspect
import re
import sys
from collections.abc import Mapping

from .engine.registry import Check, available_checks
from .engine.runner import _requires

__all__ = ["check_reference", "docstring_section"]

_HEADING = re.compile(r"^(?P<title>[A-Za-z][A-Za-z ]*)\n-+$", re.MULTILINE)

_INTRO = """\
# Check reference

Generated from the check registry by `python -m massarc.validators.reference`; do not edit
by hand (a test compares this page with the code). `massarc check --list` prints the same
options in short.

Each check states the null hypothesis it tests: what a clean run satisfies. A `fail` is
evidence against it (for a statistical check, a p-value below the check's `alpha`, so an
honest run fails with probability about `alpha`); a deterministic check judges it exactly.
`where` is the location a result points at, in the JSON report (`where`), the JUnit
message and the table; its keys are `replica`, `snapshot`, `site` (an index, or a list
for 2D sites and for pairs), `chunk` (a key of the store) and `axis` (`site` in 1D, `y` or
`x` in 2D). Options are set in `[tool.massarc.checks.<id>]` or with
`massarc check --set ID.OPTION=VALUE`.
"""

_REQUIRES = {
    "metadata": "a valid header (see `schema`)",
    "data": "at least one committed snapshot",
}


def docstring_section(cls: type, title: str) -> str:
    """The text of the numpydoc-style section ``title`` of ``cls``'s docstring, on one
    line ("" when there is none)."""
    doc = inspect.getdoc(cls) or ""
    heads = list(_HEADING.finditer(doc))
    for i, head in enumerate(heads):
        if head.group("title").strip() == title:
            end = heads[i + 1].start() if i + 1 < len(heads) else len(doc)
            text = " ".join(doc[head.end() : end].split())
            return text.replace("``", "`")  # reStructuredText literals as Markdown code
    return ""


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def _section(cls: type[Check]) -> list[str]:
    lines = [f"## `{cls.id}`", "", f"{cls.description[:1].upper()}{cls.description[1:]}.", ""]
    hypothesis = docstring_section(cls, "Null hypothesis")
    where = docstring_section(cls, "Where")
    lines += [f"**Null hypothesis.** {hypothesis or '(not stated)'}", ""]
    lines += [f"**Where.** {where or '(no location)'}", ""]
    lines += [f"**Defined in:** `{cls.__module__}` (its docstring gives every definition).", ""]
    reqs = _requires(cls)
    if reqs:
        runs = "; ".join(_REQUIRES[r] for r in reqs)
        lines += [f"**Runs when:** {runs}; otherwise `skip`.", ""]
    else:
        lines += ["**Runs when:** always.", ""]
    if cls.needs:
        stats = ", ".join(f"`{name}`" for name in cls.needs)
        lines += [f"**Reads:** {stats} (statistics of the single pass).", ""]
    if cls.options:
        lines += ["| option | default | type | meaning |", "| --- | --- | --- | --- |"]
        for name, opt in cls.options.items():
            lines.append(f"| `{name}` | `{opt.default!r}` | {opt.expected} | {_cell(opt.help)} |")
    else:
        lines.append("No options.")
    lines.append("")
    return lines


def check_reference(checks: Mapping[str, type[Check]] | None = None) -> str:
    """The Markdown page of every registered check (default: :func:`available_checks`)."""
    checks = available_checks() if checks is None else checks
    lines = [_INTRO]
    lines += [f"- [`{cid}`](#{cid}): {cls.description}" for cid, cls in checks.items()]
    lines.append("")
    for cls in checks.values():
        lines += _section(cls)
    return "\n".join(lines).rstrip("\n") + "\n"


if __name__ == "__main__":
    sys.stdout.write(check_reference())
