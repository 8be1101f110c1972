"""The Python examples of DEVELOPERS.md run as written (common practice: documentation
that is executed cannot rot). Each file's examples run in order, in one fresh interpreter,
from the repository root, so that registrations do not leak into the test process."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
FENCE = re.compile(r"^```python\n(.*?)^```", re.S | re.M)


def _examples(name: str) -> list[str]:
    return FENCE.findall((ROOT / name).read_text(encoding="utf-8"))


def test_the_developer_guide_has_examples() -> None:
    assert len(_examples("DEVELOPERS.md")) >= 2  # a statistic and a check


@pytest.mark.parametrize("name", ["DEVELOPERS.md"])
def test_python_examples_run(name: str) -> None:
    code = "\n\n".join(_examples(name))
    out = subprocess.run(
        [sys.executable, "-W", "error", "-c", code],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert out.returncode == 0, out.stderr[-3000:]
