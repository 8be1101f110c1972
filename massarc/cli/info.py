"""``massarc info``: what a run is, at a glance."""

from __future__ import annotations

import json
from typing import Any

import click

from massarc.archive.facts import run_facts
from massarc.validators import open_for_audit

from ._common import bad_input, rendering_option

__all__ = ["RENDERINGS", "command"]

#: How ``massarc info --as NAME`` prints the facts.
RENDERINGS = ("text", "json")


def _size_text(n: float) -> str:
    for unit in ("B", "KiB", "MiB", "GiB"):
        if n < 1024 or unit == "GiB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1024
    return f"{n:.1f} TiB"  # pragma: no cover


def _text_lines(f: dict[str, Any]) -> list[str]:
    if "problems" in f:
        return [f"{f['path']}", "  unreadable: " + "; ".join(f["problems"])]
    sites = " x ".join(str(s) for s in f["lattice"])
    bounds = ", ".join(f["boundary"])
    out = [
        f"{f['path']}",
        f"  model      {f['model']}",
        f"  lattice    {sites} sites, boundary {bounds}",
        f"  regime     {f['regime']} (claimed)"
        + (f", started {f['initial']}" if f.get("initial") else ""),
    ]
    if f.get("total_mass") is not None:
        out.append(f"  mass       {f['total_mass']} per replica, density {f['density']:.6g}")
    shape = f"{f['n_replicas']} replicas x {f['n_snapshots']} snapshots"
    out.append(
        f"  data       {shape}" + ("" if f["complete"] else " (INCOMPLETE: writer did not finish)")
    )
    if "time_first" in f:
        units = f["time_units"] or ""
        out.append(f"  time       {f['time_first']:g} .. {f['time_last']:g} {units}".rstrip())
        ratio = f"{f['compression']:.1f}x" if f["compression"] else "n/a"
        vs32 = f"{f['compression_vs_int32']:.1f}x" if f["compression_vs_int32"] else "n/a"
        out.append(
            f"  storage    {f['dtype']}, {_size_text(f['bytes'])} raw, "
            f"{_size_text(f['stored_bytes'])} stored ({ratio}; {vs32} against int32), "
            f"chunks {f['chunk']}"
        )
    if f.get("events"):
        out.append(f"  events     {f['events']} archived moves")
    if f.get("summaries"):
        s = f["summaries"]
        out.append(
            f"  summaries  {s['arrays']} arrays by massarc {s['massarc_version']} on "
            f"{s['created']} ({s['window']} window)"
        )
    if f.get("simulator"):
        out.append(
            f"  written by {f['simulator']}" + (f" on {f['created']}" if f.get("created") else "")
        )
    return out


@click.command("info")
@click.argument("locations", nargs=-1, required=True)
@rendering_option(RENDERINGS, "How to print the facts: human-readable lines or one JSON document.")
def command(locations: tuple[str, ...], rendering: str) -> None:
    """Describe runs (or every run of a collection): model, lattice, data, storage."""
    facts = []
    with bad_input("info"):
        for loc in locations:
            # leniently, as for an audit: invalid metadata are shown; an unknown major
            # format version is refused (FORMAT.md section 8)
            facts.extend(run_facts(run) for run in open_for_audit(loc))
    if rendering == "json":
        click.echo(json.dumps({"runs": facts}, indent=2))
        return
    click.echo("\n\n".join("\n".join(_text_lines(f)) for f in facts))
