"""What a check returns: a frozen, structured result (never an exception)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["STATUS_ORDER", "CheckResult", "Status", "Where", "worst"]

Status = Literal["pass", "warn", "fail", "skip", "error"]
#: Severity order used to summarise several results (a run's status is its worst check's).
STATUS_ORDER: dict[str, int] = {"skip": 0, "pass": 1, "warn": 2, "fail": 3, "error": 4}


class _Frozen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Where(_Frozen):
    """Location of the first offending item, when there is one. ``axis`` names a lattice
    axis as the ``mass`` array's dimension does (``site`` in 1D, ``y`` or ``x`` in 2D)."""

    replica: int | None = None
    snapshot: int | None = None
    site: int | list[int] | None = None
    chunk: str | None = None
    axis: str | None = None


class CheckResult(_Frozen):
    """Outcome of one check on one run.

    ``values`` holds measured numbers (statistics, p-values, counts); ``thresholds`` the
    limits they were judged against, so that a reader can see how close a call it was.
    """

    id: str
    status: Status
    message: str
    values: dict[str, Any] = Field(default_factory=dict)
    thresholds: dict[str, Any] = Field(default_factory=dict)
    where: Where | None = None


def worst(statuses: list[str]) -> str:
    """The most severe status of a list (``"skip"`` for an empty list)."""
    return max(statuses, key=STATUS_ORDER.__getitem__, default="skip")
