"""The frozen summarised run of format 1.1 (tests/fixtures/make_summary_fixture.py) reads
back exactly, through massarc and through plain zarr-python, and a 1.0 run reads without
summaries. The run itself is also read by tests/test_fixtures.py."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import zarr

from massarc.archive import open_run, open_runs
from massarc.schema.spec import SUMMARIES_KIND, SUMMARY_ARRAYS

FIXTURE = Path(__file__).parent / "fixtures" / "v1.1" / "zrp-ring-summarized.zarr"
STORED = json.loads(FIXTURE.with_suffix("").with_suffix(".summaries.json").read_text())


def _values(raw: object) -> np.ndarray:
    return np.asarray(raw, dtype=float)  # JSON null (NaN on disk) reads as nan


def test_every_stored_array_reads_back_with_its_dimensions_and_provenance() -> None:
    s = open_run(FIXTURE).summaries
    assert s is not None
    assert sorted(s) == sorted(STORED["arrays"])
    assert s.provenance["format"] == SUMMARIES_KIND and s.provenance["format_version"] == "1.1"
    for name, want in STORED["arrays"].items():
        assert s.dims(name) == tuple(want["dims"]) == SUMMARY_ARRAYS[name][0]
        np.testing.assert_array_equal(_values(s.array(name)), _values(want["values"]))
        attrs = s.attrs(name)
        for key in ("units", "long_name", "massarc_version", "options", "window"):
            assert key in attrs, (name, key)


def test_plain_zarr_reads_the_summaries_group() -> None:
    group = zarr.open_group(FIXTURE, mode="r")["summaries"]
    assert group.attrs["massarc"]["format"] == SUMMARIES_KIND
    arr = group["largest_mass"]
    assert tuple(arr.metadata.dimension_names) == ("replica", "time")
    np.testing.assert_array_equal(arr[:], STORED["arrays"]["largest_mass"]["values"])


def test_stored_per_snapshot_arrays_equal_numpy_on_the_frozen_masses() -> None:
    # outside truth: plain NumPy on the decoded array
    run = open_run(FIXTURE)
    mass = np.asarray(run.mass[:], dtype=np.int64)
    arrays = STORED["arrays"]
    np.testing.assert_array_equal(arrays["largest_mass"]["values"], mass.max(axis=2))
    np.testing.assert_array_equal(arrays["largest_site"]["values"], mass.argmax(axis=2))
    np.testing.assert_array_equal(arrays["second_moment"]["values"], (mass**2).sum(axis=2))
    np.testing.assert_array_equal(arrays["occupied"]["values"], (mass > 0).sum(axis=2))


@pytest.mark.parametrize("path", sorted(Path(__file__).parent.glob("fixtures/v1.0/*.zarr")))
def test_runs_of_format_1_0_read_without_summaries(path: Path) -> None:
    for run in open_runs(path):  # a collection holds several
        assert run.summaries is None
