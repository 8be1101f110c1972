"""Frozen fixture archives: every released format version must stay readable, bit-exact.

The archives under tests/fixtures/v<version>/ were written once by make_fixtures.py and
are never regenerated; the expected values sit beside them as plain JSON.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import zarr

from massarc.archive import open_run
from massarc.schema import parse_metadata

FIXTURES = sorted(Path(__file__).parent.glob("fixtures/v*/*.zarr"))


def test_there_are_fixtures_for_the_current_version() -> None:
    from massarc.schema import ARCHIVE_VERSION

    assert any(p.parent.name == f"v{ARCHIVE_VERSION}" for p in FIXTURES)


@pytest.mark.parametrize("path", FIXTURES, ids=lambda p: f"{p.parent.name}/{p.stem}")
def test_fixture_reads_back_exactly(path: Path) -> None:
    expected = json.loads(path.with_suffix("").with_suffix(".expected.json").read_text())
    mass = np.asarray(expected["mass"])
    run = open_run(path)
    assert run.complete
    assert run.shape == mass.shape
    assert np.array_equal(np.asarray(run.mass[:]), mass)
    assert np.array_equal(run.times, np.asarray(expected["time"]))
    declared = parse_metadata(expected["metadata"])
    assert run.meta.model == declared.model
    assert run.meta.lattice == declared.lattice
    assert run.meta.run.regime == declared.run.regime
    assert run.meta.run.total_mass == int(mass[0, 0].sum())
    # and without massarc: plain zarr-python sees the same numbers
    assert np.array_equal(zarr.open_group(path, mode="r")["mass"][:], mass)
