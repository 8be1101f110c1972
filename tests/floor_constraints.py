"""The requirements that pyproject.toml declares, and a pip constraints file that pins each
one to its declared floor (``make test-floor`` installs the suite with it).

    python tests/floor_constraints.py [pyproject.toml] > constraints.txt

A requirement ``name>=X`` becomes ``name==X``; one without a lower bound is left free (its
version comes from another requirement, as pydantic-core's comes from pydantic).
"""

from __future__ import annotations

import re
import sys
import tomllib
from dataclasses import dataclass
from pathlib import Path

__all__ = ["Requirement", "declared", "floor_constraints", "normalise"]

ROOT = Path(__file__).resolve().parents[1]
_REQUIREMENT = re.compile(
    r"^\s*(?P<name>[A-Za-z0-9][A-Za-z0-9._-]*)\s*(?:\[(?P<extras>[^\]]*)\])?\s*"
    r"(?P<spec>[^;]*?)\s*(?:;.*)?$"
)


@dataclass(frozen=True)
class Requirement:
    """One declared requirement: normalised name, extras asked for, lower bound (or None)."""

    name: str
    extras: tuple[str, ...]
    floor: str | None


def normalise(name: str) -> str:
    """A distribution name as package indexes compare them (PEP 503)."""
    return re.sub(r"[-_.]+", "-", name).lower()


def _parse(text: str) -> Requirement:
    match = _REQUIREMENT.match(text)
    if match is None:
        raise ValueError(f"expected a requirement such as 'name>=1.0'; got {text!r}")
    floors = [s.strip()[2:].strip() for s in match["spec"].split(",") if s.strip()[:2] == ">="]
    extras = tuple(e.strip() for e in (match["extras"] or "").split(",") if e.strip())
    return Requirement(normalise(match["name"]), extras, floors[0] if floors else None)


def declared(pyproject: Path = ROOT / "pyproject.toml") -> dict[str, list[Requirement]]:
    """Requirements by group: ``""`` for the core dependencies, else the extra's name, with
    the extras of this project that an extra includes (``massarc[all]``) expanded."""
    project = tomllib.loads(pyproject.read_text(encoding="utf-8"))["project"]
    own = normalise(project["name"])
    raw = {"": project.get("dependencies", []), **project.get("optional-dependencies", {})}

    def expand(group: str, seen: frozenset[str]) -> list[Requirement]:
        out = []
        for req in map(_parse, raw[group]):
            if req.name != own:
                out.append(req)
                continue
            for extra in req.extras:
                if extra in seen:
                    raise ValueError(f"extra {extra!r} includes itself")
                out += expand(extra, seen | {extra})
        return out

    return {group: expand(group, frozenset({group})) for group in raw}


def floor_constraints(pyproject: Path = ROOT / "pyproject.toml") -> list[str]:
    """``name==floor`` for every declared requirement with a lower bound, sorted."""
    floors: dict[str, str] = {}
    for reqs in declared(pyproject).values():
        for req in reqs:
            if req.floor is None:
                continue
            if floors.setdefault(req.name, req.floor) != req.floor:
                raise ValueError(
                    f"{req.name}: expected one floor in pyproject.toml; got {floors[req.name]} "
                    f"and {req.floor}"
                )
    return [f"{name}=={floor}" for name, floor in sorted(floors.items())]


if __name__ == "__main__":
    path = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "pyproject.toml"
    print("\n".join(floor_constraints(path)))
