"""``massarc sample``: write a reference run of the ZRP or the CMAM with massarc.simulate."""

from __future__ import annotations

import math
import shlex
from pathlib import Path
from typing import Any

import click

from massarc.archive import ArchiveError
from massarc.schema import MetadataError, load_metadata

from ._common import bad_input, die, progress_bar

_NAME = "sample"
# massarc.simulate.INITIAL_KINDS (spelled out so that `massarc --help` need not import the
# samplers and scipy.signal; a test keeps the two equal)
_INITIAL_KINDS = ("random", "uniform", "condensed", "steady-state")


class _RecordingCommand(click.Command):
    """Keeps the raw arguments, so that the run records the command line that made it."""

    def parse_args(self, ctx: click.Context, args: list[str]) -> list[str]:
        ctx.meta["massarc.argv"] = list(args)
        return super().parse_args(ctx, args)


def _mass(meta: Any, mass: int | None, density: float | None) -> int | None:
    """The total mass from --mass or --density (None: keep the metadata's run.total_mass)."""
    if mass is not None and density is not None:
        die(
            _NAME,
            f"expected one of --mass and --density; got --mass {mass} and --density {density}",
        )
    if density is None:
        return mass
    sites = meta.lattice.volume
    implied = density * sites
    if not math.isfinite(implied) or abs(implied - round(implied)) > 1e-9 * max(1.0, implied):
        die(
            _NAME,
            f"--density: expected density x sites to be a whole number; got {density} x {sites} "
            f"= {implied:g}",
        )
    return round(implied)


@click.command(_NAME, cls=_RecordingCommand)
@click.argument("out")
@click.option(
    "--meta", "meta_path", metavar="META", required=True, help="Metadata file (TOML or JSON)."
)
@click.option(
    "--set",
    "overrides",
    multiple=True,
    metavar="KEY.PATH=VALUE",
    help="Override a metadata entry (repeatable), e.g. --set model.b=4.0.",
)
@click.option(
    "--replicas",
    "n_replicas",
    metavar="R",
    type=click.IntRange(min=1),
    required=True,
    help="Independent replicas.",
)
@click.option(
    "--seed", type=click.IntRange(min=0), required=True, help="Master seed of all replicas."
)
@click.option(
    "--t-max",
    "t_max",
    type=click.FloatRange(min=0, min_open=True),
    required=True,
    help="Time of the last snapshot (> 0).",
)
@click.option(
    "--snapshots",
    "n_snapshots",
    type=click.IntRange(min=1),
    required=True,
    help="Snapshots per replica.",
)
@click.option(
    "--spacing",
    type=click.Choice(["linear", "log"]),
    default="linear",
    show_default=True,
    help="linear: from t = 0 (the initial condition) to t-max; log: geometric from "
    "min(1, t-max / snapshots) to t-max.",
)
@click.option(
    "--initial",
    type=click.Choice(list(_INITIAL_KINDS)),
    default=None,
    help="Initial condition of the dynamics [default: random].",
)
@click.option("--mass", type=click.IntRange(min=0), default=None, help="Total mass per replica.")
@click.option("--density", type=float, default=None, help="Mass per site (mass = density x sites).")
@click.option(
    "--exact",
    is_flag=True,
    help="Write independent exact steady-state samples, one per snapshot (ZRP only).",
)
@click.option("--overwrite", is_flag=True, help="Replace OUT if it exists.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@click.pass_context
def command(
    ctx: click.Context,
    out: str,
    meta_path: str,
    overrides: tuple[str, ...],
    n_replicas: int,
    seed: int,
    t_max: float,
    n_snapshots: int,
    spacing: str,
    initial: str | None,
    mass: int | None,
    density: float | None,
    exact: bool,
    overwrite: bool,
    quiet: bool,
) -> None:
    """Simulate R replicas of the model in META and write the run to OUT.

    Continuous-time dynamics observed exactly at the snapshot times, or with --exact
    independent samples of the ZRP steady state. A move into a reflecting wall is
    suppressed; an open axis (rates in lattice.open) exchanges units with reservoirs at
    its ends, and the run then records inflow and outflow.
    """
    from massarc.simulate import SamplerError, simulate, snapshot_times

    if exact and initial is not None:
        die(_NAME, f"expected no --initial with --exact (samples are independent); got {initial}")
    with bad_input(_NAME):
        meta = load_metadata(meta_path, overrides)
    total = _mass(meta, mass, density)
    if total is None and meta.run.total_mass is None:
        die(_NAME, "expected --mass or --density (or run.total_mass in the metadata); got none")
    if not overwrite and Path(out).exists():
        die(_NAME, f"{out}: already exists (pass --overwrite to replace it)")
    argv = ctx.meta.get("massarc.argv")
    line = shlex.join(["massarc", _NAME, *argv]) if argv is not None else None
    try:
        times = snapshot_times(t_max, n_snapshots, spacing)  # type: ignore[arg-type]
        with progress_bar("sampling", quiet=quiet) as progress:
            simulate(
                meta,
                times,
                replicas=n_replicas,
                seed=seed,
                mass=total,
                initial=initial or "random",
                exact=exact,
                location=out,
                overwrite=overwrite,
                progress=progress,
                command=line,
            )
    except MetadataError as exc:  # the sampler's own verdict on the metadata
        die(_NAME, f"{meta_path}: {exc}" if exc.source is None else str(exc))
    except (SamplerError, ArchiveError, OSError) as exc:
        die(_NAME, str(exc))
