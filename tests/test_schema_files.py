"""The published JSON Schemas against the raw files people write.

An independent validator (the jsonschema library, Draft 2020-12) reads the committed
schema/metadata.schema.json and schema/header.schema.json and must accept, as written (not
as the models normalise them): every samples/*.toml, and every metadata or header example
in a TOML or JSON fenced code block of the Markdown documents, found by this test itself
so that new examples are covered. The models must accept the same files, and the schema
must reject a few files the models reject.
"""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path
from typing import Any

import jsonschema
import pytest

from massarc.schema import MetadataError, parse_header, parse_metadata, read_metadata_file

ROOT = Path(__file__).resolve().parents[1]
DOCUMENTS = sorted(
    [
        ROOT / "README.md",
        ROOT / "DEVELOPERS.md",
        ROOT / "schema" / "FORMAT.md",
        *(ROOT / "docs").glob("*.md"),
        *(ROOT / "samples").glob("*.md"),
    ]
)
SAMPLES = sorted((ROOT / "samples").glob("*.toml"))

_FENCE = re.compile(r"^(```|~~~)\s*(toml|json)\s*$", re.IGNORECASE)


def _validator(which: str) -> jsonschema.Draft202012Validator:
    schema = json.loads((ROOT / "schema" / f"{which}.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


METADATA = _validator("metadata")
HEADER = _validator("header")


def _fenced_blocks(path: Path) -> list[tuple[str, str, str]]:
    """(label, language, text) of every TOML or JSON fenced code block of a Markdown file."""
    blocks: list[tuple[str, str, str]] = []
    lines = path.read_text(encoding="utf-8").splitlines()
    i = 0
    while i < len(lines):
        opening = _FENCE.match(lines[i].strip())
        if opening is None:
            i += 1
            continue
        fence, language = opening.group(1), opening.group(2).lower()
        end = next((j for j in range(i + 1, len(lines)) if lines[j].strip() == fence), None)
        assert end is not None, f"{path.name}:{i + 1}: fenced block is not closed"
        label = f"{path.relative_to(ROOT)}:{i + 1}"
        blocks.append((label, language, "\n".join(lines[i + 1 : end])))
        i = end + 1
    return blocks


def _parse(label: str, language: str, text: str) -> Any:
    try:
        return tomllib.loads(text) if language == "toml" else json.loads(text)
    except (tomllib.TOMLDecodeError, json.JSONDecodeError) as exc:
        pytest.fail(f"{label}: the {language} example does not parse ({exc})")


def _examples() -> tuple[list[Any], list[Any]]:
    """pytest params of the metadata examples and of the header examples in the documents."""
    metadata, headers = [], []
    for path in DOCUMENTS:
        for label, language, text in _fenced_blocks(path):
            data = _parse(label, language, text)
            if not isinstance(data, dict):
                continue
            if isinstance(data.get("massarc"), dict):  # the group attributes of a run
                data = data["massarc"]
            if data.get("format") == "massarc-run":
                headers.append(pytest.param(data, id=label))
            elif {"model", "lattice", "run"} & data.keys():
                metadata.append(pytest.param(data, id=label))
    return metadata, headers


METADATA_EXAMPLES, HEADER_EXAMPLES = _examples()


def _problems(validator: jsonschema.Draft202012Validator, data: Any) -> list[str]:
    return [
        f"{'.'.join(map(str, e.absolute_path)) or '(top level)'}: {e.message}"
        for e in validator.iter_errors(data)
    ]


def test_the_documents_hold_the_examples_we_know_of() -> None:
    # Guards the extraction: the minimal file of the README and the header of FORMAT.md.
    labels = [p.id for p in METADATA_EXAMPLES + HEADER_EXAMPLES]
    assert any(label.startswith("README.md:") for label in labels), labels
    assert any(label.startswith("schema/FORMAT.md:") for label in labels), labels
    readme = [p.values[0] for p in METADATA_EXAMPLES if p.id.startswith("README.md:")]
    assert any(m["lattice"]["boundary"] == "periodic" for m in readme)  # the one-string form


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.name)
def test_schema_accepts_every_sample_file_as_written(path: Path) -> None:
    data = read_metadata_file(path)
    assert _problems(METADATA, data) == []
    parse_metadata(data, str(path))  # and the models agree


@pytest.mark.parametrize("data", METADATA_EXAMPLES)
def test_schema_accepts_every_metadata_example_of_the_documents(data: dict[str, Any]) -> None:
    assert _problems(METADATA, data) == []
    parse_metadata(data)


@pytest.mark.parametrize("data", HEADER_EXAMPLES)
def test_schema_accepts_every_header_example_of_the_documents(data: dict[str, Any]) -> None:
    assert _problems(HEADER, data) == []
    assert _problems(METADATA, data["metadata"]) == []
    parse_header(data)


MINIMAL: dict[str, Any] = {
    "model": {"family": "zrp", "b": 3.5, "drift": "asymmetric"},
    "lattice": {"sites": [200], "boundary": "periodic"},
    "run": {"regime": "stationary"},
}


@pytest.mark.parametrize(
    "change",
    [
        pytest.param({"lattice": {"sites": [8, 8], "boundary": "reflecting"}}, id="one-string"),
        pytest.param({"lattice": {"sites": [8, 8], "boundary": ["open", "periodic"]}}, id="list"),
        pytest.param(
            {"model": {"family": "zrp", "b": 3.5, "right_probability": None}}, id="null-prob"
        ),
        pytest.param({"model": {"family": "custom", "description": "x"}}, id="custom"),
    ],
)
def test_schema_accepts_each_form_the_models_normalise(change: dict[str, Any]) -> None:
    data = {**MINIMAL, **change}
    parse_metadata(data)
    assert _problems(METADATA, data) == []


@pytest.mark.parametrize(
    ("change", "key"),
    [
        ({"lattice": {"sites": [200], "boundary": "ring"}}, "lattice.boundary"),
        ({"lattice": {"sites": [200], "boundary": ["ring"]}}, "lattice.boundary"),
        ({"lattice": {"sites": [200], "boundary": 3}}, "lattice.boundary"),
        ({"lattice": {"sites": [0], "boundary": "open"}}, "lattice.sites"),
        ({"lattice": {"sites": [4, 4, 4], "boundary": "open"}}, "lattice.sites"),
        ({"model": {"family": "zrq", "b": 3.5}}, "model"),
        ({"model": {"b": 3.5}}, "model"),
        ({"model": {"family": "zrp", "b": 3.5, "bb": 1}}, "model"),
        ({"model": {"family": "zrp", "b": 3.5, "right_probability": 1.5}}, "model"),
        ({"model": {"family": "cmam", "diffusion": -1.0, "chipping": 1.0}}, "model"),
        ({"model": {"family": "custom", "description": "x", "parameters": {"q": [1]}}}, "model"),
        ({"run": {"regime": "steady"}}, "run.regime"),
        ({"run": {"regime": "stationary", "total_mass": 2.5}}, "run.total_mass"),
        ({"run": {"regime": "stationary", "seeds": "1"}}, "run.seeds"),
        ({"extra": [1]}, "extra"),
        ({"lattices": {}}, "(top level)"),
    ],
)
def test_schema_rejects_files_the_models_reject(change: dict[str, Any], key: str) -> None:
    data = {**MINIMAL, **change}
    with pytest.raises(MetadataError):
        parse_metadata(data)
    problems = _problems(METADATA, data)
    assert problems, f"the schema accepts {change}"
    assert any(p.startswith(key) for p in problems), problems
