"""``thermorc demo``: the whole job on the bundled, invented demo data."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from thermorc.cli._app import app
from thermorc.cli._common import guarded, out_console


@app.command(epilog="Example: thermorc demo --out demo_out")
@guarded
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo outputs.", rich_help_panel="Output")] = Path(
        "demo_out"
    ),
    quiet: Annotated[bool, typer.Option("--quiet", help="Print nothing but errors.")] = False,
):
    """Run the whole job on the bundled demo data (an invented home)."""
    from thermorc.demo import run_demo

    run_demo(out, log=(lambda line: None) if quiet else (lambda line: out_console.print(line, markup=False)))
