"""``massarc info``: what a run is, at a glance."""

from __future__ import annotations

import click

command = click.Command("info", help="placeholder")
