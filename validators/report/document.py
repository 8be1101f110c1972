"""The JSON report as a document: pydantic models of the shape :func:`.report_dict` writes,
and its JSON Schema (draft 2020-12), committed as ``schema/report.schema.json`` and printed
by ``massarc schema --of report``.

The models describe the document only; the report itself is :class:`.AuditReport`. A test
validates real reports against the committed schema with an independent validator, so the
two cannot part silently.

>>> report_schema()["title"]
'ReportDocument'
"""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from ..engine.result import Status, Where
from .model import OptionSetting
from .sweep import SweepRow

__all__ = ["CheckDocument", "ReportDocument", "RunDocument", "report_schema"]


class _Frozen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class CheckDocument(_Frozen):
    """What one check said about one run."""

    id: str = Field(description="The check id (see docs/checks.md).")
    status: Status
    message: str
    where: Where | None = Field(
        None, description="Where the first offending item is; only the keys that are set."
    )
    values: dict[str, Any] = Field(description="Measured numbers; non-finite floats are null.")
    thresholds: dict[str, Any] = Field(description="The limits the values were judged against.")


class RunDocument(_Frozen):
    """The checks of one run; ``status`` is the worst of theirs."""

    path: str
    status: Status
    checks: list[CheckDocument]
    seconds: float = Field(ge=0)
    chunks: int = Field(ge=0, description="Chunks of the run's mass array.")
    chunks_read: int = Field(ge=0, description="Chunks the single pass decoded.")
    bytes_decoded: int = Field(ge=0)


class ReportDocument(_Frozen):
    """The JSON report of ``massarc check --as json``."""

    runs: list[RunDocument]
    status: Status = Field(description="The worst status of the runs (skip when there are none).")
    strict: bool = Field(description="Whether warnings counted as failures.")
    massarc_version: str
    seconds: float = Field(ge=0)
    config: str | None = Field(description="The settings file that applied, or null.")
    options: list[OptionSetting] = Field(
        description="Every check option not at its default, and where its value came from."
    )
    ignored: list[str] = Field(
        description="Configuration files found inside the audited runs and not read."
    )
    sweep: list[SweepRow] = Field(
        description="The sweep table: one row per run, its parameters and verdicts."
    )


def report_schema() -> dict[str, Any]:
    """The JSON Schema of the JSON report (draft 2020-12)."""
    schema = ReportDocument.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = "https://massarc.invalid/schema/report.json"
    return schema
