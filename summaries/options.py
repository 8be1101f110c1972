"""The options of the summaries: one frozen record, stored with every array it made.

Options come from the caller (``summarize(..., options={...})``, ``massarc summarize --set
NAME=VALUE``); every value is checked against its declared type and range, and an error
names the option, what was expected and what was given.

>>> SummaryOptions.from_mapping({"probes": 16}).probes
16
>>> SummaryOptions.from_mapping({"probes": "many"})
Traceback (most recent call last):
    ...
ValueError: option probes: expected an integer >= 2; got 'many'
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import Any

__all__ = ["SummaryOptions"]


def _opt(default: Any, kind: type, help_text: str, *, low: float | None = None,
         choices: tuple[str, ...] = (), optional: bool = False) -> Any:  # fmt: skip
    meta = {"kind": kind, "help": help_text, "low": low, "choices": choices, "optional": optional}
    return field(default=default, metadata=meta)


@dataclass(frozen=True)
class SummaryOptions:
    """What the summaries are computed with (see ``massarc summarize --help-options``)."""

    probes: int = _opt(64, int, "snapshots where G(r, t) and confidence intervals are kept", low=2)
    probe_spacing: str = _opt(
        "run", str, "probes evenly spaced in snapshot index (the run's own sampling), in "
        "time (linear) or geometrically in time (log)", choices=("run", "linear", "log"),
    )  # fmt: skip
    window: str = _opt(
        "stationary", str, "window of the occupation law, the extreme values and the "
        "condensate: the stationary window (else the last half), the last half, or all",
        choices=("stationary", "last-half", "all"),
    )  # fmt: skip
    condensate_factor: float = _opt(
        20.0, float, "a condensate holds more than this multiple of rho_c (else of the "
        "mean density)", low=0.0,
    )  # fmt: skip
    condensate_above: float | None = _opt(
        None, float, "explicit condensate threshold (mass units); overrides the factor",
        low=0.0, optional=True,
    )  # fmt: skip
    occupation_bins: int = _opt(1024, int, "masses 0 .. bins-2 counted exactly; the last bin "
                                "holds every larger mass", low=2)  # fmt: skip
    occupation_blocks: int = _opt(256, int, "snapshot blocks per replica the occupation "
                                  "window is cut on", low=1)  # fmt: skip
    resamples: int = _opt(999, int, "bootstrap resamples over replicas", low=9)
    confidence: float = _opt(0.95, float, "confidence level of the intervals", low=0.0)
    seed: int = _opt(0, int, "seed of the bootstrap and of the half-sample split", low=0)
    fit_start: float | None = _opt(None, float, "first time of the exponent fits (default: "
                                   "fit_decades below fit_stop)", optional=True)  # fmt: skip
    fit_stop: float | None = _opt(None, float, "last time of the exponent fits (default: "
                                  "fit_saturation x the relaxation time, else the end)",
                                  optional=True)  # fmt: skip
    fit_saturation: float = _opt(0.1, float, "default fit_stop as a fraction of the model's "
                                 "relaxation time L^z", low=0.0)  # fmt: skip
    fit_decades: float = _opt(2.0, float, "default fitting range in decades of time", low=0.0)
    fit_points: int = _opt(64, int, "geometrically spaced snapshots the exponents are "
                           "fitted on", low=3)  # fmt: skip
    min_decades: float = _opt(1.0, float, "a fitting range shorter than this many decades "
                              "is flagged too short", low=0.0)  # fmt: skip
    extreme_max: int = _opt(500, int, "largest sample of the extreme-value fits (thinned "
                            "further beyond)", low=20)  # fmt: skip
    gof: str = _opt("half-sample", str, "goodness-of-fit p-value: KS with parameters fitted "
                    "on a random half, or a parametric bootstrap (slow)",
                    choices=("half-sample", "bootstrap"))  # fmt: skip
    gof_draws: int = _opt(199, int, "parametric-bootstrap draws when gof = bootstrap", low=9)
    zero_crossing: bool = _opt(False, bool, "also store the first zero of G (extended "
                               "domains of custom models)")  # fmt: skip

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            if not _accepts(f.metadata, value):
                raise ValueError(
                    f"option {f.name}: expected {_expected(f.metadata)}; got {value!r}"
                )
        if self.confidence >= 1.0:
            raise ValueError(
                f"option confidence: expected a number in (0, 1); got {self.confidence!r}"
            )

    @classmethod
    def from_mapping(cls, values: Mapping[str, Any] | None) -> SummaryOptions:
        """Options from a mapping; an unknown name is an error listing the known ones."""
        values = dict(values or {})
        names = [f.name for f in fields(cls)]
        for key in values:
            if key not in names:
                raise ValueError(f"option {key!r}: expected one of {', '.join(names)}")
        return cls(**values)

    @classmethod
    def parse_text(cls, name: str, text: str) -> Any:
        """A command-line value for option ``name``, converted to its declared type."""
        meta = next((f.metadata for f in fields(cls) if f.name == name), None)
        if meta is None:
            names = ", ".join(f.name for f in fields(cls))
            raise ValueError(f"option {name!r}: expected one of {names}")
        if meta["optional"] and text.lower() in ("none", ""):
            return None
        kind = meta["kind"]
        try:
            if kind is bool:
                if text.lower() not in ("true", "false"):
                    raise ValueError(text)
                return text.lower() == "true"
            return kind(text)
        except ValueError:
            raise ValueError(f"option {name}: expected {_expected(meta)}; got {text!r}") from None

    def as_dict(self) -> dict[str, Any]:
        """Plain values by name (what is stored with the summaries)."""
        return dataclasses.asdict(self)

    @classmethod
    def help_lines(cls) -> list[str]:
        """One line per option: name=default, help, expected values."""
        return [
            f"{f.name}={f.default!r}  {f.metadata['help']} ({_expected(f.metadata)})"
            for f in fields(cls)
        ]


def _accepts(meta: Mapping[str, Any], value: Any) -> bool:
    if value is None:
        return bool(meta["optional"])
    kind = meta["kind"]
    if kind is bool:
        return isinstance(value, bool)
    if isinstance(value, bool):
        return False
    if kind is float:
        ok = isinstance(value, int | float) and value == value and abs(value) != float("inf")
    else:
        ok = isinstance(value, kind)
    if ok and meta["low"] is not None:  # integers: at least low; numbers: above it
        ok = value >= meta["low"] if kind is int else value > meta["low"]
    if ok and meta["choices"]:
        ok = value in meta["choices"]
    return ok


def _expected(meta: Mapping[str, Any]) -> str:
    kind = meta["kind"]
    if meta["choices"]:
        return "one of " + ", ".join(meta["choices"])
    words = {int: "an integer", float: "a number", bool: "true or false", str: "a string"}[kind]
    if meta["low"] is not None:
        words += f" >= {meta['low']:g}" if kind is int else f" > {meta['low']:g}"
    return words + (" or none" if meta["optional"] else "")
