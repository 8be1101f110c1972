"""The runs that files belong to: what a pre-commit hook audits when files change.

Tools that track files (pre-commit, ``git diff --name-only``) name the files of a run, not
the run: ``ring.zarr/mass/c/0/3/0``, ``ring.zarr/zarr.json``. :func:`enclosing_runs` maps
each file to the nearest directory above it (or itself) whose ``zarr.json`` carries the
massarc attribute: a run, or a collection when the file belongs to the collection's own
metadata rather than to one of its runs. Files outside any run are ignored; each run is
named once, in the order first met, and not at all when a collection holding it is named
(the collection's audit covers it).

>>> enclosing_runs(["samples/dune-strip.zarr/mass/zarr.json", "README.md"])
['samples/dune-strip.zarr']
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterable
from pathlib import Path

from massarc.schema.spec import ATTRIBUTE_KEY, COLLECTION_KIND, RUN_KIND

__all__ = ["enclosing_runs"]


def _is_massarc_node(directory: Path) -> bool:
    """True when ``directory/zarr.json`` declares a run or a collection (the ``format`` of
    its massarc attribute), or cannot be read as a JSON object at all (a damaged run is for
    the audit to report, not to be skipped)."""
    node = directory / "zarr.json"
    if not node.is_file():
        return False
    try:
        doc = json.loads(node.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return True
    if not isinstance(doc, dict):
        return True
    attrs = doc.get("attributes")
    raw = attrs.get(ATTRIBUTE_KEY) if isinstance(attrs, dict) else None
    return isinstance(raw, dict) and raw.get("format") in (RUN_KIND, COLLECTION_KIND)


def enclosing_runs(files: Iterable[str | os.PathLike[str]]) -> list[str]:
    """The runs (or collections) holding ``files``, each once, in the order first met;
    a run inside a named collection is left out.

    A path is reported as given (relative paths stay relative); a file that no longer
    exists still maps to its run while the run's directory exists (a deleted chunk is a
    change the audit must see).
    """
    found: dict[str, None] = {}
    known: dict[Path, Path | None] = {}  # directory -> its enclosing run (cache)
    for item in files:
        path = Path(item)
        start = path if path.is_dir() else path.parent
        chain: list[Path] = []
        hit: Path | None = None
        for d in (start, *start.parents):
            if d in known:
                hit = known[d]
                break
            chain.append(d)
            if _is_massarc_node(d):
                hit = d
                break
        for d in chain:
            known[d] = hit
        if hit is not None:
            found.setdefault(hit.as_posix(), None)
    named = [Path(p) for p in found]
    return [p.as_posix() for p in named if not any(q in p.parents for q in named)]
