"""A run as a point of a parameter sweep: its model parameters, and whether theory puts it
in the condensed phase.

The critical density rho_c comes from :func:`massarc.schema.laws.critical_density`:
1/(b - 2) for the ZRP with u(k) = 1 + b/k and b > 2 (Evans and Hanney, J. Phys. A 38,
R195, 2005), sqrt(w/D + 1) - 1 for the CMAM (mean field; Majumdar, Krishnamurthy and
Barma, PRL 81, 3691, 1998). A point is ``condensed`` when its density exceeds rho_c. A ZRP
with b <= 2, or with a constant hop rate, has no condensate at any density (same review):
``condensed`` is false. Otherwise it is None when either is unknown (no total mass or
density declared, or no rho_c for the model, as for a table of rates).

:func:`write_rows` writes rows of a sweep table as CSV, one column per key.

>>> from massarc.schema import parse_metadata
>>> meta = parse_metadata({"model": {"family": "zrp", "b": 4.0},
...     "lattice": {"sites": [100], "boundary": "periodic"},
...     "run": {"regime": "stationary", "total_mass": 150}})
>>> p = sweep_point(meta)
>>> p.parameter, p.density, p.critical_density, p.condensed
('b=4', 1.5, 0.5, True)
"""

from __future__ import annotations

import csv
import math
from collections.abc import Mapping, Sequence
from typing import IO, Any

from pydantic import BaseModel, ConfigDict

from .models import CMAMModel, RunMeta, ZRPModel

__all__ = ["SweepPoint", "sweep_point", "write_rows"]


class SweepPoint(BaseModel):
    """The parameters of one run of a sweep (JSON-ready; None where they do not apply)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    family: str
    #: ``symmetric`` or ``asymmetric`` (None for a model without one).
    drift: str | None
    #: The model's main parameter as text: ``b=4``, ``w=1``, ``w=2,D=0.5``, ``rate=1``.
    parameter: str
    b: float | None
    chipping: float | None
    diffusion: float | None
    #: Sites along each axis, and their product.
    sites: list[int]
    volume: int
    density: float | None
    critical_density: float | None
    #: density > critical_density (theory); None when either is unknown.
    condensed: bool | None


def _parameter(model: Any) -> str:
    if isinstance(model, ZRPModel):
        if model.b is not None:
            return f"b={model.b:g}"
        return f"rate={model.rate:g}" if model.rate is not None else "rates"
    if isinstance(model, CMAMModel):
        return f"w={model.chipping:g}" + (f",D={model.diffusion:g}" if model.diffusion != 1 else "")
    return ""


def sweep_point(meta: RunMeta) -> SweepPoint:
    """The sweep parameters of a run with valid metadata."""
    from .laws import critical_density  # scipy: loaded only when a sweep is tabulated

    model = meta.model
    rho = meta.run.density
    if rho is None and meta.run.total_mass is not None:
        rho = meta.run.total_mass / meta.lattice.volume
    rho_c = critical_density(model)
    if rho_c is not None and not math.isfinite(rho_c):
        rho_c = None
    condensed = None if rho is None or rho_c is None else bool(rho > rho_c)
    if isinstance(model, ZRPModel) and (
        (model.b is not None and model.b <= 2) or model.rate is not None
    ):
        condensed = False  # no condensate at any density (Evans and Hanney 2005)
    return SweepPoint(
        family=model.family,
        drift=getattr(model, "drift", None),
        parameter=_parameter(model),
        b=getattr(model, "b", None),
        chipping=getattr(model, "chipping", None),
        diffusion=getattr(model, "diffusion", None),
        sites=list(meta.lattice.sites),
        volume=int(meta.lattice.volume),
        density=None if rho is None else float(rho),
        critical_density=rho_c,
        condensed=condensed,
    )


def write_rows(rows: Sequence[Mapping[str, Any]], file: IO[str]) -> None:
    """Rows of a sweep table as CSV with a header (columns: the keys of the first row;
    lists joined with ``x``, None as an empty cell).

    >>> import io
    >>> buf = io.StringIO()
    >>> write_rows([{"run": "a", "sites": [8, 8], "condensed": None}], buf)
    >>> buf.getvalue().splitlines()
    ['run,sites,condensed', 'a,8x8,']
    """
    if not rows:
        return
    writer = csv.DictWriter(file, fieldnames=list(rows[0]), lineterminator="\n")
    writer.writeheader()
    for row in rows:
        writer.writerow(
            {k: "x".join(map(str, v)) if isinstance(v, list) else v for k, v in row.items()}
        )
