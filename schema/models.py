"""The metadata of one run: strict, frozen pydantic models.

Unknown keys are errors (``extra="forbid"``), values are not coerced (``strict=True``) and
models are immutable and hashable: sequences are tuples and free tables read-only
(:mod:`.frozen`); dumping gives plain lists and dicts. The model family is a discriminated
union on ``model.family``; :data:`FAMILIES` lists its tags.

A rule that involves several keys reports its error at the key it is about (a per-field
validator that reads the keys declared before it, or an error built with its location),
so that :func:`~.errors.validation_problems` takes every key path from pydantic's error
locations.

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
from typing import Annotated, Any, Literal, get_args

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    ValidationInfo,
    WrapValidator,
    field_validator,
    model_validator,
)
from pydantic_core import InitErrorDetails, PydanticCustomError, PydanticKnownError

from .frozen import FrozenMap, Items, Table

__all__ = [
    "BOUNDARIES",
    "FAMILIES",
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

Boundary = Literal["periodic", "reflecting", "open"]
BOUNDARIES: tuple[str, ...] = get_args(Boundary)
Drift = Literal["symmetric", "asymmetric"]


def _one_scalar(value: Any, handler: Any) -> Any:
    """One error for a value that is none of the scalar types (not one per type tried)."""
    try:
        return handler(value)
    except ValidationError:
        raise PydanticCustomError(
            "scalar_type", "expected a number, a string or true/false; got {got}", {"got": value}
        ) from None


Scalar = Annotated[float | int | str | bool, WrapValidator(_one_scalar)]


def _error_at(
    loc: tuple[str | int, ...], error: PydanticCustomError, value: Any
) -> ValidationError:
    """A validation error located at ``loc`` below the field or model that raises it."""
    return ValidationError.from_exception_data(
        "RunMeta", [InitErrorDetails(type=error, loc=loc, input=value)]
    )


class StrictModel(BaseModel):
    """Base of every metadata model: unknown keys are errors, nothing is coerced, frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


#: What the JSON Schema says of a rate that :func:`_finite_positive` checks.
_POSITIVE = {"exclusiveMinimum": 0}


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
        None,  # type: ignore[assignment]  # filled from drift by _default_from_drift
        validate_default=True,
        description="Probability that a move goes to the +1 neighbour along its axis. "
        "Default 0.5 when symmetric, 1.0 (totally asymmetric) when asymmetric.",
    )

    @field_validator(
        "right_probability",
        mode="before",
        json_schema_input_type=Annotated[float, Field(ge=0, le=1)] | None,
    )
    @classmethod
    def _default_from_drift(cls, value: Any, info: ValidationInfo) -> Any:
        """Fill ``right_probability`` from ``drift`` when it is not given (or null)."""
        if value is None:
            return 1.0 if info.data.get("drift") == "asymmetric" else 0.5
        return value

    @field_validator("right_probability")
    @classmethod
    def _check_drift(cls, p: float, info: ValidationInfo) -> float:
        if not 0.0 <= p <= 1.0:
            raise PydanticCustomError(
                "probability", "expected a value in [0, 1]; got {got}", {"got": p}
            )
        drift = info.data.get("drift")  # absent when drift itself is invalid
        if drift == "symmetric" and p != 0.5:
            raise PydanticCustomError(
                "drift_mismatch",
                'expected 0.5 for drift = "symmetric"; got {got}',
                {"got": p},
            )
        if drift == "asymmetric" and p == 0.5:
            raise PydanticCustomError(
                "drift_mismatch",
                'expected a value other than 0.5 for drift = "asymmetric"; got 0.5',
            )
        return p


class ZRPModel(_Drift):
    """Zero-range process: a site holding m >= 1 particles emits one at rate u(m).

    Give exactly one hop-rate law: ``b`` for u(k) = 1 + b/k, ``rate`` for a constant u(k),
    or ``rates`` = [u(1), ..., u(K)], constant u(K) beyond K.
    """

    family: Literal["zrp"]
    b: float | None = Field(None, description="u(k) = 1 + b/k.")
    rate: float | None = Field(
        None, description="Constant hop rate u(k) = rate.", json_schema_extra=_POSITIVE
    )
    rates: Items[Annotated[float, Field(json_schema_extra=_POSITIVE)]] | None = Field(
        None, description="u(1), ..., u(K); u(k) = u(K) for k > K.", min_length=1
    )

    @field_validator("b")
    @classmethod
    def _b_above_minus_one(cls, v: float | None) -> float | None:
        if v is not None and (not math.isfinite(v) or v <= -1):
            raise PydanticCustomError(
                "hop_law",
                "expected a finite value > -1 (so that u(1) > 0); got {got}",
                {"got": v},
            )
        return v

    @field_validator("rate")
    @classmethod
    def _rate_positive(cls, v: float | None) -> float | None:
        return None if v is None else _finite_positive(v)

    @field_validator("rates")
    @classmethod
    def _rates_positive(cls, v: tuple[float, ...] | None) -> tuple[float, ...] | None:
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
        return self


class CMAMModel(_Drift):
    """Conserved-mass aggregation/chipping: a whole cluster hops at rate D, one unit chips at w."""

    family: Literal["cmam"]
    diffusion: float = Field(
        description="Rate D at which a site's whole mass hops.", json_schema_extra=_POSITIVE
    )
    chipping: float = Field(
        description="Rate w at which a single unit chips off.", json_schema_extra=_POSITIVE
    )

    @field_validator("diffusion", "chipping")
    @classmethod
    def _positive(cls, v: float) -> float:
        return _finite_positive(v)


class CustomModel(StrictModel):
    """Any other mass-transport model: a description and free parameters."""

    family: Literal["custom"]
    description: str
    parameters: Table[Scalar] = Field(default_factory=FrozenMap)


_Families = ZRPModel | CMAMModel | CustomModel
Model = Annotated[_Families, Field(discriminator="family")]
#: The model families, in declaration order: the tags of the discriminated union ``Model``.
FAMILIES: tuple[str, ...] = tuple(
    tag
    for member in get_args(_Families)
    for tag in get_args(member.model_fields["family"].annotation)
)


class OpenRates(StrictModel):
    """Reservoir rates of open axes: units enter at site 0 and leave from the last site."""

    injection: float = Field(ge=0, description="Rate at which a unit enters at site 0.")
    extraction: float = Field(ge=0, description="Rate at which a unit leaves the last site.")


class Lattice(StrictModel):
    """Lattice shape (one entry per axis, at most 2) and the boundary of each axis."""

    sites: Items[Annotated[int, Field(gt=0)]] = Field(min_length=1, max_length=2)
    boundary: Items[Boundary] = Field(
        description='One of "periodic", "reflecting", "open", or one per axis.'
    )
    open: OpenRates | None = None

    @field_validator("boundary", mode="before", json_schema_input_type=Boundary | list[Boundary])
    @classmethod
    def _one_for_every_axis(cls, value: Any, info: ValidationInfo) -> Any:
        """A single string (hand-written files) applies to every axis."""
        if isinstance(value, list | tuple):
            return value
        if not isinstance(value, str):
            raise PydanticCustomError(
                "boundary_type",
                "expected one of {choices}, or a list of them; got {got}",
                {"choices": ", ".join(BOUNDARIES), "got": value},
            )
        if value not in BOUNDARIES:
            # the error pydantic gives for a wrong entry of the list, so it reads the same
            raise PydanticKnownError(
                "literal_error", {"expected": ", ".join(map(repr, BOUNDARIES))}
            )
        sites = info.data.get("sites")  # absent when sites itself is invalid
        return (value,) * (len(sites) if sites else 1)

    @field_validator("boundary")
    @classmethod
    def _one_per_axis(cls, value: tuple[str, ...], info: ValidationInfo) -> tuple[str, ...]:
        sites = info.data.get("sites")
        if sites is not None and len(value) != len(sites):
            raise PydanticCustomError(
                "boundary",
                "expected one entry per axis ({n}); got {got}",
                {"n": len(sites), "got": len(value)},
            )
        return value

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
    density: Annotated[float, Field(ge=0, allow_inf_nan=False)] | None = Field(
        None, description="total_mass / number of sites."
    )
    initial: InitialCondition | None = None
    time_units: str = Field("model time", description="Unit of the time array.")
    sampling: Literal["linear", "log", "other"] | None = Field(
        None, description="How snapshot times were spaced."
    )
    seeds: Items[int] | None = Field(None, description="One seed per replica, in replica order.")


class RunMeta(StrictModel):
    """Everything a run says about itself. Stored in the archive header under ``metadata``."""

    model: Model
    lattice: Lattice
    run: RunInfo
    simulator: Simulator | None = None
    created: str | None = Field(None, description="ISO 8601 creation time.")
    extra: Table[Any] = Field(default_factory=FrozenMap, description="Free table.")

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

    @field_validator("run")
    @classmethod
    def _density_of_total_mass(cls, run: RunInfo, info: ValidationInfo) -> RunInfo:
        lattice = info.data.get("lattice")  # absent when lattice itself is invalid
        if lattice is None or run.total_mass is None or run.density is None:
            return run
        implied = run.total_mass / lattice.volume
        if not math.isclose(implied, run.density, rel_tol=1e-9, abs_tol=1e-12):
            raise _error_at(
                ("density",),
                PydanticCustomError(
                    "density",
                    "expected total_mass / sites = {implied}; got {got}",
                    {"implied": implied, "got": run.density},
                ),
                run.density,
            )
        return run
