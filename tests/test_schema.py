"""The metadata contract: the minimal file, readable errors, the committed JSON Schema,
and the versioning policy of schema/FORMAT.md."""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import jsonschema
import pytest

from massarc.schema import (
    FAMILIES,
    MetadataError,
    NewerFormatWarning,
    json_schema,
    load_metadata,
    parse_header,
    parse_metadata,
)

ROOT = Path(__file__).resolve().parents[1]

MINIMAL_TOML = """\
[model]
family = "zrp"          # "zrp" | "cmam" | "custom"
b = 3.5                 # zrp: u(k) = 1 + b/k   (or: rates = [u1, u2, ...])
drift = "asymmetric"    # zrp: "symmetric" | "asymmetric"
# cmam: diffusion = 1.0 and chipping = 1.0
[lattice]
sites = [200]           # lattice shape, one entry per axis
boundary = "periodic"   # "periodic" | "reflecting" | "open"
[run]
regime = "stationary"   # "stationary" | "transient"
"""

MINIMAL = {
    "model": {"family": "zrp", "b": 3.5, "drift": "asymmetric"},
    "lattice": {"sites": [200], "boundary": "periodic"},
    "run": {"regime": "stationary"},
}


def test_minimal_toml_and_json_are_the_same_contract(tmp_path: Path) -> None:
    (tmp_path / "meta.toml").write_text(MINIMAL_TOML)
    (tmp_path / "meta.json").write_text(json.dumps(MINIMAL))
    a = load_metadata(tmp_path / "meta.toml")
    b = load_metadata(tmp_path / "meta.json")
    assert a == b
    assert a.model.family == "zrp" and a.model.b == 3.5 and a.model.right_probability == 1.0
    assert a.lattice.boundary == ("periodic",) and a.lattice.volume == 200
    assert a.run.regime == "stationary"


def test_cmam_and_custom_variants() -> None:
    cmam = parse_metadata(
        {**MINIMAL, "model": {"family": "cmam", "diffusion": 1.0, "chipping": 2.0}}
    )
    assert cmam.model.family == "cmam" and cmam.model.right_probability == 0.5
    custom = parse_metadata(
        {**MINIMAL, "model": {"family": "custom", "description": "x", "parameters": {"q": 0.3}}}
    )
    assert custom.model.parameters == {"q": 0.3}


def test_error_names_key_path_and_reason() -> None:
    bad = {**MINIMAL, "lattice": {"sites": [200], "boundary": "ring"}}
    with pytest.raises(MetadataError) as err:
        parse_metadata(bad, "meta.toml")
    assert str(err.value) == (
        'meta.toml: lattice.boundary: expected one of periodic, reflecting, open; got "ring"'
    )


@pytest.mark.parametrize(
    ("change", "expected"),
    [
        (
            {"model": {"family": "zrq"}},
            'model.family: expected one of zrp, cmam, custom; got "zrq"',
        ),
        ({"model": {"family": "zrp", "b": 3.5, "bb": 1}}, "model.bb: unknown key"),
        ({"model": {"family": "zrp"}}, "model: expected exactly one hop-rate law"),
        ({"model": {"family": "zrp", "b": 2, "rate": 1.0}}, "got b, rate"),
        (
            {"model": {"family": "cmam", "diffusion": 1.0}},
            "model.chipping: required key is missing",
        ),
        (
            {"model": {"family": "cmam", "diffusion": -1.0, "chipping": 1.0}},
            "model.diffusion: expected a finite number > 0; got -1.0",
        ),
        (
            {"lattice": {"sites": [0], "boundary": "periodic"}},
            "lattice.sites[0]: expected a value > 0",
        ),
        (
            {"lattice": {"sites": [4, 4, 4], "boundary": "periodic"}},
            "lattice.sites: expected at most 2 entries; got 3",
        ),
        (
            {"lattice": {"sites": [4, 4], "boundary": ["periodic"]}},
            "lattice.boundary: expected one entry per axis (2); got 1",
        ),
        (
            {"run": {"regime": "steady"}},
            'run.regime: expected one of stationary, transient; got "steady"',
        ),
        (
            {"run": {"regime": "stationary", "total_mass": 2.5}},
            "run.total_mass: expected an integer; got 2.5",
        ),
        (
            {"run": {"regime": "stationary", "total_mass": 100, "density": 0.4}},
            "run.density: expected total_mass / sites = 0.5; got 0.4",
        ),
    ],
)
def test_readable_errors(change: dict, expected: str) -> None:
    with pytest.raises(MetadataError) as err:
        parse_metadata({**MINIMAL, **change})
    assert expected in str(err.value)
    assert "\n" not in str(err.value)


@pytest.mark.parametrize(
    ("change", "problems"),
    [
        (  # one line for a single string, not one per axis it would apply to
            {"lattice": {"sites": [4, 4], "boundary": "ring"}},
            ['lattice.boundary: expected one of periodic, reflecting, open; got "ring"'],
        ),
        (
            {"lattice": {"sites": [4, 4], "boundary": ["periodic", "ring"]}},
            ['lattice.boundary[1]: expected one of periodic, reflecting, open; got "ring"'],
        ),
        (
            {"lattice": {"sites": [4], "boundary": 3}},
            [
                "lattice.boundary: expected one of periodic, reflecting, open, or a list of them; "
                "got 3"
            ],
        ),
        (  # an invalid shape is reported once, not again as a boundary of the wrong length
            {"lattice": {"sites": [4, 0], "boundary": "periodic"}},
            ["lattice.sites[1]: expected a value > 0; got 0"],
        ),
        (
            {"model": {"family": "zrp", "b": 1.0, "drift": "symmetric", "right_probability": 0.7}},
            ['model.right_probability: expected 0.5 for drift = "symmetric"; got 0.7'],
        ),
        (
            {
                "model": {
                    "family": "cmam",
                    "diffusion": 1.0,
                    "chipping": 1.0,
                    "drift": "asymmetric",
                    "right_probability": 0.5,
                }
            },
            [
                "model.right_probability: expected a value other than 0.5 for drift = "
                '"asymmetric"; got 0.5'
            ],
        ),
        (
            {"model": {"family": "zrp", "b": 1.0, "right_probability": 1.5, "drift": "asymmetric"}},
            ["model.right_probability: expected a value in [0, 1]; got 1.5"],
        ),
        (
            {"model": {"family": "zrp", "b": -1.0}},
            ["model.b: expected a finite value > -1 (so that u(1) > 0); got -1.0"],
        ),
        (
            {"model": {"family": "custom", "description": "x", "parameters": {"q": [1]}}},
            ["model.parameters.q: expected a number, a string or true/false; got [1]"],
        ),
        (
            {"model": {"drift": "symmetric"}},
            ["model: required key family is missing (one of zrp, cmam, custom)"],
        ),
        (
            {"run": {"regime": "stationary", "density": float("inf")}},
            ["run.density: expected a finite number; got Infinity"],
        ),
        (
            {"run": {"regime": "stationary", "seeds": [1, "2"]}},
            ['run.seeds[1]: expected an integer; got "2"'],
        ),
    ],
)
def test_each_error_is_one_line_at_its_key(change: dict, problems: list[str]) -> None:
    with pytest.raises(MetadataError) as err:
        parse_metadata({**MINIMAL, **change})
    assert err.value.problems == problems


def test_syntax_errors_name_the_file(tmp_path: Path) -> None:
    p = tmp_path / "meta.toml"
    p.write_text("[model\nfamily = 'zrp'\n")
    with pytest.raises(MetadataError, match=r"meta\.toml: invalid TOML"):
        load_metadata(p)
    q = tmp_path / "meta.json"
    q.write_text('{"model": }')
    with pytest.raises(MetadataError, match=r"meta\.json: line 1: invalid JSON"):
        load_metadata(q)


def test_overrides_apply_typed_values(tmp_path: Path) -> None:
    (tmp_path / "meta.toml").write_text(MINIMAL_TOML)
    meta = load_metadata(
        tmp_path / "meta.toml", ["model.b=4", "run.regime=transient", "lattice.sites=[10, 20]"]
    )
    assert meta.model.b == 4 and meta.run.regime == "transient"
    assert meta.lattice.sites == (10, 20) and meta.lattice.boundary == ("periodic", "periodic")


@pytest.mark.parametrize("which", ["metadata", "header"])
def test_committed_json_schema_has_not_drifted(which: str) -> None:
    committed = json.loads((ROOT / "schema" / f"{which}.schema.json").read_text())
    assert committed == json_schema(which), (
        f"schema/{which}.schema.json is stale: regenerate with "
        f"`massarc schema --of {which} > schema/{which}.schema.json`"
    )


def test_schema_accepts_what_the_models_accept() -> None:
    # An independent validator (the jsonschema library, Draft 2020-12) applied to our files.
    schema = json.loads((ROOT / "schema" / "metadata.schema.json").read_text())
    meta = parse_metadata(MINIMAL)
    jsonschema.Draft202012Validator(schema).validate(meta.model_dump(mode="json"))
    bad = meta.model_dump(mode="json")
    bad["lattice"]["boundary"] = ["ring"]
    assert not jsonschema.Draft202012Validator(schema).is_valid(bad)


def _header(version: str, **extra_meta: object) -> dict:
    return {
        "format": "massarc-run",
        "format_version": version,
        "state": {"snapshots": 0, "replicas": 0, "complete": False},
        "metadata": {**parse_metadata(MINIMAL).model_dump(mode="json"), **extra_meta},
    }


def test_unknown_major_version_is_refused() -> None:
    with pytest.raises(MetadataError, match=r"reads format 1\.x; the archive is format 2\.0"):
        parse_header(_header("2.0"), "run.zarr")


def test_newer_minor_ignores_unknown_fields_with_a_warning() -> None:
    with pytest.warns(NewerFormatWarning):
        header = parse_header(_header("1.7", provenance_hash="abc"), "run.zarr")
    assert header.metadata.model.b == 3.5


def test_same_minor_unknown_field_is_an_error() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(MetadataError, match=r"metadata\.provenance_hash: unknown key"):
            parse_header(_header("1.0", provenance_hash="abc"), "run.zarr")


def test_newer_minor_drops_unknown_fields_inside_the_model_family() -> None:
    # pydantic locates the key at metadata.model.zrp.hop_cutoff; the family tag is not a key
    raw = _header("1.3")
    raw["metadata"]["model"]["hop_cutoff"] = 40
    with pytest.warns(NewerFormatWarning):
        header = parse_header(raw, "run.zarr")
    assert header.metadata.model.b == 3.5
    assert "hop_cutoff" not in header.metadata.model.model_dump()


def test_the_families_are_the_tags_of_the_model_union() -> None:
    mapping = json_schema("metadata")["properties"]["model"]["discriminator"]["mapping"]
    assert FAMILIES == ("zrp", "cmam", "custom") and set(mapping) == set(FAMILIES)
