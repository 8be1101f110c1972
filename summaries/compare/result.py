"""The result of ``compare``: frozen models whose JSON form is stable (``--as json``)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict

__all__ = ["Comparison", "Difference", "ObservableComparison"]

#: Observables compared, in the order they are reported.
OBSERVABLE_NAMES = ("occupation", "largest-mass", "correlation")


class _Frozen(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Difference(_Frozen):
    """One metadata entry of the two runs. ``kind``: ``claim`` (model, lattice, density:
    the runs must agree on it to be compared) or ``extent`` (replicas, snapshots, times,
    window: expected to differ). ``same`` says whether the two values are equal."""

    key: str
    a: Any
    b: Any
    kind: Literal["claim", "extent"]
    same: bool


class ObservableComparison(_Frozen):
    """One observable: the test, its null hypothesis, statistic, p-values and verdict.

    ``status`` is ``pass`` (compatible at the level after the Holm correction), ``fail``
    (incompatible) or ``skip`` (not compared; ``reason`` says why). ``p_value`` is the
    test's own, ``adjusted_p`` after Holm's correction over the observables compared.
    ``sizes`` are the effective sizes of runs A and B the test used.
    """

    observable: Literal["occupation", "largest-mass", "correlation"]
    status: Literal["pass", "fail", "skip"]
    test: str
    null: str
    statistic: float | None = None
    dof: float | None = None
    p_value: float | None = None
    adjusted_p: float | None = None
    sizes: tuple[float, float] | None = None
    reason: str = ""
    detail: dict[str, Any] = {}


class Comparison(_Frozen):
    """What ``compare`` says of runs A and B.

    ``status``: ``fail`` when an observable is incompatible at ``level`` (exit status 1),
    ``pass`` when at least one was compared and none is (exit status 0), ``skip`` when
    none could be compared. ``forced`` is true when differing claims were overridden.
    ``sources`` says per run whether the summaries were ``stored`` or ``computed`` (in
    memory, not written); ``windows`` holds each run's window.
    """

    a: str
    b: str
    status: Literal["pass", "fail", "skip"]
    level: float
    correction: Literal["holm"] = "holm"
    forced: bool
    metadata: tuple[Difference, ...]
    observables: tuple[ObservableComparison, ...]
    sources: tuple[str, str]
    windows: tuple[dict[str, Any], dict[str, Any]]
    massarc_version: str

    def failed(self) -> list[str]:
        """The observables found incompatible."""
        return [o.observable for o in self.observables if o.status == "fail"]
