"""Plain facts about a run, for ``massarc info`` and reports: no statistics, no data pass."""

from __future__ import annotations

from typing import Any

import numpy as np

from massarc.schema.models import CMAMModel, CustomModel, ZRPModel
from massarc.schema.spec import MASS

from .reader import Run

__all__ = ["model_line", "run_facts"]


def model_line(model: ZRPModel | CMAMModel | CustomModel) -> str:
    """A one-line description of the declared model.

    >>> model_line(ZRPModel(family="zrp", b=3.5, drift="asymmetric"))
    'ZRP, u(k) = 1 + 3.5/k, asymmetric (right_probability = 1)'
    """
    if isinstance(model, ZRPModel):
        if model.b is not None:
            law = f"u(k) = 1 + {model.b:g}/k"
        elif model.rate is not None:
            law = f"u(k) = {model.rate:g}"
        else:
            rates = model.rates or []
            shown = ", ".join(f"{r:g}" for r in rates[:4]) + (", ..." if len(rates) > 4 else "")
            law = f"u(1..{len(rates)}) = [{shown}], constant beyond"
        return f"ZRP, {law}, {_drift(model)}"
    if isinstance(model, CMAMModel):
        return f"CMAM, D = {model.diffusion:g}, w = {model.chipping:g}, {_drift(model)}"
    return f"custom: {model.description}"


def _drift(model: ZRPModel | CMAMModel) -> str:
    if model.drift == "symmetric":
        return "symmetric"
    return f"asymmetric (right_probability = {model.right_probability:g})"


def run_facts(run: Run) -> dict[str, Any]:
    """What ``massarc info`` shows, as a JSON-ready dict."""
    meta = run.meta
    facts: dict[str, Any] = {"path": run.name}
    if meta is None or run.array(MASS) is None:
        facts["problems"] = run.problems or [run.unreadable.get(MASS, f"no '{MASS}' array")]
    if meta is not None:
        lat = meta.lattice
        facts.update(
            model=model_line(meta.model),
            family=meta.model.family,
            lattice=list(lat.sites),
            boundary=list(lat.boundary),
            regime=meta.run.regime,
            total_mass=meta.run.total_mass,
            density=meta.run.density,
            initial=meta.run.initial.kind if meta.run.initial else None,
            simulator=meta.simulator.name if meta.simulator else None,
            created=meta.created,
        )
    facts.update(n_replicas=run.n_replicas, n_snapshots=run.n_snapshots, complete=run.complete)
    if run.has_data:
        times = run.times
        stored = run.stored_bytes()
        facts.update(
            time_first=float(times[0]),
            time_last=float(times[-1]),
            time_units=meta.run.time_units if meta else None,
            dtype=str(run.dtype),
            chunk=list(run.mass.chunks),
            bytes=run.nbytes,
            stored_bytes=stored,
            compression=run.nbytes / stored if stored else None,
            compression_vs_int32=(run.nbytes * 4 / run.dtype.itemsize / stored if stored else None),
        )
    if run.events is not None:
        facts["events"] = int(np.prod(run.events["time"].shape))
    stored = None if "problems" in facts else run.summaries  # its arrays are unreadable
    if stored is not None:
        prov = stored.provenance
        facts["summaries"] = {
            "arrays": len(stored),
            "massarc_version": prov.get("massarc_version"),
            "created": prov.get("created"),
            "window": (prov.get("window") or {}).get("rule"),
        }
    return facts
