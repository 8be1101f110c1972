"""The metadata models are really frozen: nothing reachable from a model can be changed, every
model hashes by content, and dumping gives back plain lists and dicts (so JSON, TOML and
the archive header read exactly as before)."""

from __future__ import annotations

import copy
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
import tomli_w
from pydantic import BaseModel, ValidationError

from massarc.archive import create_run
from massarc.schema import RunMeta, load_metadata, parse_metadata

# Every optional part of the metadata, with nested tables and lists in the free tables.
FULL: dict[str, Any] = {
    "model": {
        "family": "zrp",
        "rates": [2.0, 1.5, 1.25],
        "drift": "asymmetric",
        "right_probability": 0.8,
    },
    "lattice": {"sites": [6, 8], "boundary": ["periodic", "reflecting"]},
    "run": {
        "regime": "stationary",
        "total_mass": 96,
        "density": 2.0,
        "initial": {"kind": "random", "description": "wagons scattered at random"},
        "time_units": "hours",
        "sampling": "linear",
        "seeds": [11, 12, 13],
    },
    "simulator": {"name": "depot-sim", "version": "2.1", "commit": "abc123", "command": "x"},
    "created": "2024-05-01T12:00:00+00:00",
    "extra": {
        "scenario": "depot ring",
        "depots": [1, 2, 3],
        "line": {"km": 12.5, "stops": [{"name": "north", "tracks": [1, 2]}]},
    },
}

CUSTOM: dict[str, Any] = {
    **FULL,
    "model": {
        "family": "custom",
        "description": "wagons with two speeds",
        "parameters": {"fast": 0.3, "lanes": 2, "label": "two-speed", "coupled": True},
    },
}


def _walk(value: Any) -> list[Any]:
    """Every value reachable from ``value`` through model fields, mappings and sequences."""
    out = [value]
    if isinstance(value, BaseModel):
        children = [getattr(value, name) for name in type(value).model_fields]
    elif isinstance(value, dict) or (hasattr(value, "keys") and hasattr(value, "items")):
        children = list(value.values())
    elif isinstance(value, list | tuple):
        children = list(value)
    else:
        children = []
    for child in children:
        out.extend(_walk(child))
    return out


@pytest.mark.parametrize("data", [FULL, CUSTOM], ids=["zrp", "custom"])
def test_nothing_reachable_from_a_model_is_mutable(data: dict[str, Any]) -> None:
    meta = parse_metadata(data)
    for value in _walk(meta):
        assert not isinstance(value, list | dict | set | bytearray), value
        hash(value)  # raises TypeError for anything unhashable


MUTATIONS: dict[str, Callable[[RunMeta], object]] = {
    "sites.append": lambda m: m.lattice.sites.append(9),
    "sites[0]=": lambda m: m.lattice.sites.__setitem__(0, 9),
    "boundary.append": lambda m: m.lattice.boundary.append("open"),
    "seeds.append": lambda m: m.run.seeds.append(14),
    "rates.append": lambda m: m.model.rates.append(3.0),
    "extra[k]=": lambda m: m.extra.__setitem__("scenario", "other"),
    "del extra[k]": lambda m: m.extra.__delitem__("scenario"),
    "extra.update": lambda m: m.extra.update({"new": 1}),
    "extra.pop": lambda m: m.extra.pop("scenario"),
    "nested table": lambda m: m.extra["line"].__setitem__("km", 0.0),
    "nested list": lambda m: m.extra["line"]["stops"][0]["tracks"].append(3),
}


@pytest.mark.parametrize("name", sorted(MUTATIONS))
def test_mutating_a_sequence_or_table_fails(name: str) -> None:
    meta = parse_metadata(FULL)
    with pytest.raises((AttributeError, TypeError)):
        MUTATIONS[name](meta)
    assert meta == parse_metadata(FULL) and meta.lattice.volume == 48


def test_custom_parameters_are_read_only() -> None:
    meta = parse_metadata(CUSTOM)
    with pytest.raises(TypeError):
        meta.model.parameters["fast"] = 0.5
    assert meta.model.parameters == CUSTOM["model"]["parameters"]


def test_assigning_a_field_fails() -> None:
    meta = parse_metadata(FULL)
    with pytest.raises(ValidationError, match="frozen"):
        meta.lattice.sites = (9,)
    with pytest.raises(ValidationError, match="frozen"):
        meta.extra = {}


def test_the_callers_data_is_neither_kept_nor_changed() -> None:
    data = copy.deepcopy(FULL)
    meta = parse_metadata(data)
    assert data == FULL
    data["lattice"]["sites"].append(9)
    data["extra"]["line"]["stops"][0]["tracks"].append(3)
    assert meta.lattice.sites == (6, 8)
    assert meta.extra["line"]["stops"][0]["tracks"] == (1, 2)


@pytest.mark.parametrize("data", [FULL, CUSTOM], ids=["zrp", "custom"])
def test_equal_metadata_hash_equal(data: dict[str, Any]) -> None:
    a = parse_metadata(data)
    # the same metadata written in another key order, with tuples where lists were
    shuffled = json.loads(json.dumps(data))
    shuffled["extra"] = dict(reversed(list(shuffled["extra"].items())))
    shuffled["extra"]["line"] = dict(reversed(list(shuffled["extra"]["line"].items())))
    shuffled["lattice"]["sites"] = tuple(shuffled["lattice"]["sites"])
    b = parse_metadata(dict(reversed(list(shuffled.items()))))
    assert a == b and hash(a) == hash(b)
    assert len({a, b}) == 1 and {a: "run"}[b] == "run"
    changed = json.loads(json.dumps(data))
    changed["extra"]["line"]["stops"][0]["tracks"] = [1, 3]
    assert parse_metadata(changed) != a


def test_a_single_boundary_string_and_its_list_are_the_same_metadata() -> None:
    one = parse_metadata({**FULL, "lattice": {"sites": [6, 8], "boundary": "periodic"}})
    per_axis = parse_metadata(
        {**FULL, "lattice": {"sites": [6, 8], "boundary": ["periodic", "periodic"]}}
    )
    assert one == per_axis and hash(one) == hash(per_axis)
    assert one.lattice.boundary == ("periodic", "periodic")


def _plain(value: Any) -> None:
    """Assert that a dump holds only dicts, lists and scalars."""
    if isinstance(value, dict):
        assert type(value) is dict
        for v in value.values():
            _plain(v)
    elif isinstance(value, list):
        for v in value:
            _plain(v)
    else:
        assert value is None or isinstance(value, str | int | float | bool), type(value)


@pytest.mark.parametrize("data", [FULL, CUSTOM], ids=["zrp", "custom"])
def test_dumps_are_plain_and_round_trip_through_json(data: dict[str, Any], tmp_path: Path) -> None:
    meta = parse_metadata(data)
    for dump in (meta.model_dump(), meta.model_dump(mode="json")):
        _plain(dump)
    assert meta.model_dump(exclude_none=True) == data  # FULL and CUSTOM are already normal
    assert parse_metadata(json.loads(meta.model_dump_json())) == meta
    path = tmp_path / "meta.json"
    path.write_text(json.dumps(meta.model_dump(mode="json")))
    assert load_metadata(path) == meta


@pytest.mark.parametrize("data", [FULL, CUSTOM], ids=["zrp", "custom"])
def test_dumps_round_trip_through_toml(data: dict[str, Any], tmp_path: Path) -> None:
    meta = parse_metadata(data)
    path = tmp_path / "meta.toml"
    path.write_text(tomli_w.dumps(meta.model_dump(exclude_none=True)))  # TOML has no null
    back = load_metadata(path)
    assert back == meta and hash(back) == hash(meta)


def test_null_entries_of_the_free_table_survive_a_dump() -> None:
    data = {**FULL, "extra": {"note": None, "nested": {"gap": None, "list": [None, 1]}}}
    meta = parse_metadata(data)
    assert meta.model_dump(mode="json", exclude_none=True)["extra"] == data["extra"]


def test_the_written_header_is_the_plain_normalised_metadata(tmp_path: Path) -> None:
    # The header of format 1.0 (schema/FORMAT.md, section 3), written out by hand: the
    # boundary one entry per axis, right_probability filled from drift, None left out.
    meta = parse_metadata(
        {
            "model": {"family": "zrp", "b": 4.0, "drift": "asymmetric"},
            "lattice": {"sites": [4], "boundary": "periodic"},
            "run": {"regime": "stationary", "total_mass": 8, "seeds": [5]},
            "extra": {"scenario": "depot ring", "depots": [1, 2], "line": {"km": 1.5}},
        }
    )
    with create_run(tmp_path / "r.zarr", meta) as writer:
        writer.append([0.0], [[[2, 2, 2, 2]]])
    stored = json.loads((tmp_path / "r.zarr" / "zarr.json").read_text())["attributes"]
    expected = (
        '{"model": {"drift": "asymmetric", "right_probability": 1.0, "family": "zrp", '
        '"b": 4.0}, "lattice": {"sites": [4], "boundary": ["periodic"]}, "run": '
        '{"regime": "stationary", "total_mass": 8, "density": 2.0, "time_units": '
        '"model time", "seeds": [5]}, "extra": {"scenario": "depot ring", "depots": '
        '[1, 2], "line": {"km": 1.5}}}'
    )
    assert json.dumps(stored["massarc"]["metadata"]) == expected
