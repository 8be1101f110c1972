"""The check reference (docs/checks.md) is generated from the check registry and cannot
drift from it: ids, null hypotheses, locations, defaults and options."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from massarc.validators import available_checks
from massarc.validators.checks import builtin_checks
from massarc.validators.reference import check_reference, docstring_section

ROOT = Path(__file__).resolve().parents[1]
PAGE = ROOT / "docs" / "checks.md"


def test_the_committed_page_is_the_generated_one() -> None:
    assert PAGE.read_text(encoding="utf-8") == check_reference(), (
        "docs/checks.md is stale: regenerate with "
        "`python -m massarc.validators.reference > docs/checks.md`"
    )


def test_the_documented_command_prints_the_page() -> None:
    got = subprocess.run(
        [sys.executable, "-m", "massarc.validators.reference"],
        capture_output=True,
        text=True,
        check=True,
        cwd=ROOT,
    )
    assert got.stdout == check_reference()


def test_every_builtin_check_states_its_null_hypothesis_and_location() -> None:
    for cls in builtin_checks():
        assert docstring_section(cls, "Null hypothesis"), f"{cls.id}: no null hypothesis"
        assert docstring_section(cls, "Where"), f"{cls.id}: no Where section"


def test_the_page_shows_every_id_and_option_default_of_the_registry() -> None:
    page = check_reference()
    for cid, cls in available_checks().items():
        assert f"## `{cid}`" in page
        section = page.split(f"## `{cid}`", 1)[1].split("\n## ", 1)[0]
        for name, opt in cls.options.items():
            assert f"| `{name}` | `{opt.default!r}` | {opt.expected} |" in section


def test_a_docstring_section_is_read_up_to_the_next_heading() -> None:
    class Example:
        """One line.

        Null hypothesis
        ---------------
        The coin is fair:
        ``p = 1/2``.

        Where
        -----
        Nowhere.
        """

    assert docstring_section(Example, "Null hypothesis") == "The coin is fair: `p = 1/2`."
    assert docstring_section(Example, "Where") == "Nowhere."
    assert docstring_section(Example, "Notes") == ""
