"""The examples in the docstrings of the summaries and their statistics run and hold."""

from __future__ import annotations

import doctest
import importlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
MODULES = [
    "massarc.archive.stats.condensates",
    "massarc.archive.stats.correlation",
    "massarc.archive.summaries",
    "massarc.summaries.api",
    "massarc.summaries.build",
    "massarc.summaries.collect",
    "massarc.summaries.extremes",
    "massarc.summaries.growth",
    "massarc.summaries.options",
    "massarc.summaries.replicas",
    "massarc.summaries.theory",
]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name, monkeypatch):
    monkeypatch.chdir(ROOT)  # examples read samples/
    module = importlib.import_module(name)
    flags = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE
    result = doctest.testmod(module, optionflags=flags, verbose=False)
    assert result.attempted > 0, f"{name} has no example"
    assert result.failed == 0
