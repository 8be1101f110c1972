"""``massarc verify``: recompute the content digest of stamped runs and compare it with
their stamps (FORMAT.md, section 10).

Exit status: 0 when every run matches its stamp; 1 when a run does not (its data, header
or some array changed since it was stamped, or can no longer be read), naming what
differs; 2 when an input is not a run, or a run has no stamp or an unreadable one, with one
line ``massarc verify: error: ...`` on stderr.
"""

from __future__ import annotations

import json
import sys

import click

from massarc.archive import open_runs
from massarc.archive.stamp import Verdict, verify_stamp

from ._common import bad_input, command_class, die, rendering_option

__all__ = ["command"]

_NAME = "verify"


def _line(v: Verdict) -> str:
    stamp = v.stamp
    when = f"stamped {stamp.get('created', '?')} by massarc {stamp.get('massarc_version', '?')}"
    audit = stamp.get("audit") if isinstance(stamp.get("audit"), dict) else {}
    verdict = f"audit {audit.get('status', '?')}"
    if v.matches:
        return f"{v.run}: matches its stamp (sha256 {v.stamped[:16]}..., {when}, {verdict})"
    what = "; ".join(v.differing)
    return f"{v.run}: does not match its stamp ({when}): differs: {what}"


@click.command(_NAME, cls=command_class(_NAME))
@click.argument("runs", nargs=-1, metavar="RUN_OR_COLLECTION...")
@rendering_option(("text", "json"), "How to print the verdicts.")
def command(runs: tuple[str, ...], rendering: str) -> None:
    """Tell whether stamped runs still hold what was audited (massarc check --stamp)."""
    if not runs:
        die(_NAME, "expected at least one RUN_OR_COLLECTION; got none")
    verdicts = []
    with bad_input(_NAME):
        for location in runs:
            for run in open_runs(location, lenient=True):
                verdicts.append(verify_stamp(run))
    if rendering == "json":
        rows = [
            {
                "run": v.run,
                "matches": v.matches,
                "stamped": v.stamped,
                "now": v.now,
                "differing": v.differing,
                "created": v.stamp.get("created"),
            }
            for v in verdicts
        ]
        click.echo(json.dumps({"runs": rows}, indent=2))
    else:
        for v in verdicts:
            click.echo(_line(v))
    sys.exit(0 if all(v.matches for v in verdicts) else 1)
