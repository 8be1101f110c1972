"""The JSON Schemas of the metadata file and of the archive header, generated from the
models (the committed copies under schema/ are guarded by a drift test)."""

from __future__ import annotations

from typing import Any

from .header import ArchiveHeader
from .models import RunMeta
from .spec import ARCHIVE_VERSION

__all__ = ["SCHEMAS", "json_schema"]

#: What ``json_schema`` can describe.
SCHEMAS = ("metadata", "header")


def json_schema(which: str = "metadata") -> dict[str, Any]:
    """The JSON Schema of the metadata file (``"metadata"``) or archive header (``"header"``).

    >>> json_schema("header")["title"]
    'ArchiveHeader'
    """
    model = {"metadata": RunMeta, "header": ArchiveHeader}.get(which)
    if model is None:
        raise ValueError(f"expected one of {', '.join(SCHEMAS)}; got {which!r}")
    schema = model.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = f"https://massarc.invalid/schema/{which}-v{ARCHIVE_VERSION}.json"
    return schema
