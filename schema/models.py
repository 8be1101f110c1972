"""The metadata of one run: strict, frozen pydantic models.

Unknown keys are errors (``extra="forbid"``), values are not coerced (``strict=True``) and
models are immutable. The model family is a discriminated union on ``model.family``.

The minimal hand-written file is a contract::

    [model]
    family = "zrp"
    b = 3.5
    drift = "asymmetric"
    [lattice]
    sites = [200]
    boundary = "periodic"
    [run]
    regime = "stationary"

Everything else is optional or derived from the data.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator
from pydantic_core import PydanticCustomError

__all__ = [
    "BOUNDARIES",
    "CMAMModel",
    "CustomModel",
    "InitialCondition",
    "Lattice",
    "Model",
    "OpenRates",
    "RunInfo",
    "RunMeta",
    "Simulator",
    "StrictModel",
    "ZRPModel",
]

BOUNDARIES = ("periodic", "reflecting", "open")
Boundary = Literal["periodic", "reflecting", "open"]
Drift = Literal["symmetric", "asymmetric"]


class StrictModel(BaseModel):
    """Base of every metadata model: unknown keys are errors, nothing is coerced, frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


def _finite_positive(value: float) -> float:
    if not math.isfinite(value) or value <= 0:
        raise PydanticCustomError(
            "positive_rate", "expected a finite number > 0; got {got}", {"got": value}
        )
    return value


class _Drift(StrictModel):
    """Shared drift fields of the models with nearest-neighbour moves."""

    drift: Drift = Field(
        "symmetric",
        description="symmetric: every neighbour equally likely; asymmetric: biased towards +axis.",
    )
    right_probability: float = Field(
        0.5,
        description="Probability that a move goes to the +1 neighbour along its axis. "
        "Default 0.5 when symmetric, 1.0 (totally asymmetric) when asymmetric.",
    )

    @model_validator(mode="before")
    @classmethod
    def _default_right_probability(cls, data: Any) -> Any:
        """Fill ``right_probability`` from ``drift`` when it is not given."""
        if isinstance(data, dict) and data.get("right_probability") is None:
            data = {k: v for k, v in data.items() if k != "right_probability"}
            if data.get("drift") == "asymmetric":
                data["right_probability"] = 1.0
        return data

    @model_validator(mode="after")
    def _check_drift(self) -> _Drift:
        p = self.right_probability
        if not 0.0 <= p <= 1.0:
            raise PydanticCustomError(
                "probability",
                "right_probability: expected a value in [0, 1]; got {got}",
                {"got": p},
            )
        if self.drift == "symmetric" and p != 0.5:
            raise PydanticCustomError(
                "drift_mismatch",
                'right_probability: expected 0.5 for drift = "symmetric"; got {got}',
                {"got": p},
            )
        if self.drift == "asymmetric" and p == 0.5:
            raise PydanticCustomError(
                "drift_mismatch",
                'right_probability: expected a value other than 0.5 for drift = "asymmetric"; '
                "got 0.5",
            )
        return self


class ZRPModel(_Drift):
    """Zero-range process: a site holding m >= 1 particles emits one at rate u(m).

    Give exactly one hop-rate law: ``b`` for u(k) = 1 + b/k, ``rate`` for a constant u(k),
    or ``rates`` = [u(1), ..., u(K)], constant u(K) beyond K.
    """

    family: Literal["zrp"]
    b: float | None = Field(None, description="u(k) = 1 + b/k.")
    rate: float | None = Field(None, description="Constant hop rate u(k) = rate.")
    rates: list[float] | None = Field(
        None, description="u(1), ..., u(K); u(k) = u(K) for k > K.", min_length=1
    )

    @field_validator("rate")
    @classmethod
    def _rate_positive(cls, v: float | None) -> float | None:
        return None if v is None else _finite_positive(v)

    @field_validator("rates")
    @classmethod
    def _rates_positive(cls, v: list[float] | None) -> list[float] | None:
        if v is None:
            return v
        for k, r in enumerate(v, start=1):
            if not math.isfinite(r) or r <= 0:
                raise PydanticCustomError(
                    "positive_rate",
                    "expected every u(k) finite and > 0; got u({k}) = {got}",
                    {"k": k, "got": r},
                )
        return v

    @model_validator(mode="after")
    def _one_law(self) -> ZRPModel:
        given = [k for k in ("b", "rate", "rates") if getattr(self, k) is not None]
        if len(given) != 1:
            raise PydanticCustomError(
                "hop_law",
                "expected exactly one hop-rate law among b, rate, rates; got {got}",
                {"got": ", ".join(given) if given else "none"},
            )
        if self.b is not None and (not math.isfinite(self.b) or self.b <= -1):
            raise PydanticCustomError(
                "hop_law",
                "b: expected a finite value > -1 (so that u(1) > 0); got {got}",
                {"got": self.b},
            )
        return self


class CMAMModel(_Drift):
    """Conserved-mass aggregation/chipping: a whole cluster hops at rate D, one unit chips at w."""

    family: Literal["cmam"]
    diffusion: float = Field(description="Rate D at which a site's whole mass hops.")
    chipping: float = Field(description="Rate w at which a single unit chips off.")

    @field_validator("diffusion", "chipping")
    @classmethod
    def _positive(cls, v: float) -> float:
        return _finite_positive(v)


class CustomModel(StrictModel):
    """Any other mass-transport model: a description and free parameters."""

    family: Literal["custom"]
    description: str
    parameters: dict[str, float | int | str | bool] = Field(default_factory=dict)


Model = Annotated[ZRPModel | CMAMModel | CustomModel, Field(discriminator="family")]


class OpenRates(StrictModel):
    """Reservoir rates of open axes: units enter at site 0 and leave from the last site."""

    injection: float = Field(ge=0, description="Rate at which a unit enters at site 0.")
    extraction: float = Field(ge=0, description="Rate at which a unit leaves the last site.")


class Lattice(StrictModel):
    """Lattice shape (one entry per axis, at most 2) and the boundary of each axis."""

    sites: list[Annotated[int, Field(gt=0)]] = Field(min_length=1, max_length=2)
    boundary: list[Boundary] = Field(
        description='One of "periodic", "reflecting", "open", or one per axis.'
    )
    open: OpenRates | None = None

    @model_validator(mode="before")
    @classmethod
    def _broadcast_boundary(cls, data: Any) -> Any:
        if not isinstance(data, dict):
            return data
        b = data.get("boundary")
        if isinstance(b, str):
            if b not in BOUNDARIES:
                raise PydanticCustomError(
                    "boundary",
                    "boundary: expected one of periodic, reflecting, open; got {got}",
                    {"got": f'"{b}"'},
                )
            sites = data.get("sites")
            n = len(sites) if isinstance(sites, list) and sites else 1
            data = {**data, "boundary": [b] * n}
        return data

    @model_validator(mode="after")
    def _shape(self) -> Lattice:
        if len(self.boundary) != len(self.sites):
            raise PydanticCustomError(
                "boundary",
                "boundary: expected one entry per axis ({n}); got {got}",
                {"n": len(self.sites), "got": len(self.boundary)},
            )
        return self

    @property
    def ndim(self) -> int:
        return len(self.sites)

    @property
    def volume(self) -> int:
        return math.prod(self.sites)

    @property
    def closed(self) -> bool:
        """True when no axis is open, so total mass must be conserved."""
        return "open" not in self.boundary


class InitialCondition(StrictModel):
    """How the replicas were started."""

    kind: Literal["random", "uniform", "steady-state", "condensed", "previous-run", "other"] = (
        Field(
            description="random: masses scattered at random; uniform: equal masses; "
            "steady-state: an exact sample of the stationary law; condensed: all mass on one "
            "site; previous-run: last snapshot of another run; other: see description."
        )
    )
    description: str | None = None


class Simulator(StrictModel):
    """Provenance: which program wrote the run."""

    name: str
    version: str | None = None
    commit: str | None = None
    command: str | None = Field(None, description="The command line that produced the run.")


class RunInfo(StrictModel):
    """What the run claims about itself, and how it was sampled."""

    regime: Literal["stationary", "transient"]
    total_mass: Annotated[int, Field(ge=0)] | None = Field(
        None, description="Mass per replica (closed systems: the same in every snapshot)."
    )
    density: Annotated[float, Field(ge=0)] | None = Field(
        None, description="total_mass / number of sites."
    )
    initial: InitialCondition | None = None
    time_units: str = Field("model time", description="Unit of the time array.")
    sampling: Literal["linear", "log", "other"] | None = Field(
        None, description="How snapshot times were spaced."
    )
    seeds: list[int] | None = Field(None, description="One seed per replica, in replica order.")

    @model_validator(mode="after")
    def _finite(self) -> RunInfo:
        if self.density is not None and not math.isfinite(self.density):
            raise PydanticCustomError(
                "density", "density: expected a finite number; got {got}", {"got": self.density}
            )
        return self


class RunMeta(StrictModel):
    """Everything a run says about itself. Stored in the archive header under ``metadata``."""

    model: Model
    lattice: Lattice
    run: RunInfo
    simulator: Simulator | None = None
    created: str | None = Field(None, description="ISO 8601 creation time.")
    extra: dict[str, Any] = Field(default_factory=dict, description="Free table.")

    @field_validator("created")
    @classmethod
    def _iso(cls, v: str | None) -> str | None:
        if v is not None:
            try:
                datetime.fromisoformat(v)
            except ValueError:
                raise PydanticCustomError(
                    "iso_time", "expected an ISO 8601 time; got {got}", {"got": f'"{v}"'}
                ) from None
        return v

    @model_validator(mode="after")
    def _consistent(self) -> RunMeta:
        r, lat = self.run, self.lattice
        if r.total_mass is not None and r.density is not None:
            implied = r.total_mass / lat.volume
            if not math.isclose(implied, r.density, rel_tol=1e-9, abs_tol=1e-12):
                raise PydanticCustomError(
                    "density",
                    "run.density: expected total_mass / sites = {implied}; got {got}",
                    {"implied": implied, "got": r.density},
                )
        return self
