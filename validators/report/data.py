"""The JSON report.

Shape (stable; outside tools rely on it)::

    {"runs": [{"path": "...", "status": "fail",
               "checks": [{"id": "conservation", "status": "fail", "message": "...",
                           "where": {"replica": 2, "snapshot": 1234},
                           "values": {...}, "thresholds": {...}}]}],
     "status": "fail", "strict": false, "massarc_version": "...", ...,
     "config": "pyproject.toml",
     "options": [{"check": "conservation", "option": "tolerance", "value": 2,
                  "default": 0, "source": "--set"}],
     "ignored": ["sweep/run-3.zarr/massarc.toml"],
     "sweep": [{"run": "...", "family": "zrp", "parameter": "b=4", "density": 0.75,
                "critical_density": 0.5, "condensed": true, "stationary": "pass",
                "window_start": 0, "valid": "pass", ...}]}

``config`` is the settings file read (null: none); ``options`` lists every check option
not at its default with where its value came from (the file, ``--set``); ``ignored`` the
configuration files found inside the audited runs and collections, never read; ``sweep``
has one row per run (see :mod:`.sweep`).

``where`` holds only the keys that are set and is left out when there is no location.
NumPy numbers become JSON numbers; non-finite floats become null.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from .model import AuditReport
from .sweep import sweep_rows

__all__ = ["report_dict", "report_json"]


def _plain(x: Any) -> Any:
    if isinstance(x, dict):
        return {str(k): _plain(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [_plain(v) for v in x]
    if isinstance(x, np.ndarray):
        return _plain(x.tolist())
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if x is None or isinstance(x, bool | int | float | str):
        return x
    return str(x)


def report_dict(report: AuditReport) -> dict[str, Any]:
    """The report as plain JSON-ready data."""
    runs = []
    for run in report.runs:
        checks = []
        for c in run.checks:
            item: dict[str, Any] = {"id": c.id, "status": c.status, "message": c.message}
            if c.where is not None:
                where = c.where.model_dump(exclude_none=True)
                if where:
                    item["where"] = where
            item["values"] = _plain(c.values)
            item["thresholds"] = _plain(c.thresholds)
            checks.append(item)
        runs.append(
            {
                "path": run.path,
                "status": run.status,
                "checks": checks,
                "seconds": round(run.seconds, 6),
                "chunks": run.chunks,
                "chunks_read": run.chunks_read,
                "bytes_decoded": run.bytes_decoded,
            }
        )
    return {
        "runs": runs,
        "status": report.status,
        "strict": report.strict,
        "massarc_version": report.massarc_version,
        "seconds": round(report.seconds, 6),
        "config": report.config,
        "sweep": _plain(sweep_rows(report)),
        "options": [_plain(o.model_dump()) for o in report.options],
        "ignored": list(report.ignored),
    }


def report_json(report: AuditReport) -> str:
    """The report as a JSON document (indented, ends with a newline)."""
    return json.dumps(report_dict(report), indent=2, allow_nan=False) + "\n"
