"""``thermorc fleet``: calibrate every home of a manifest, locally or on a Dask cluster."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Optional

import typer

from thermorc.cli._app import app
from thermorc.cli._common import GAINS_HOURS_HELP, err_console, fail, gains_option, guarded, out_console
from thermorc.cli.calibrate import GainsChoice, ModelChoice

EPILOG = "Example: thermorc fleet homes.toml --out RESULTS.parquet --workers 8 --model auto"

CAUTION = (
    "These are screening estimates from thermostat data. Do not size heating equipment from them: use a "
    "design-load calculation to local codes, by a licensed professional."
)


def _cell(value):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    if isinstance(value, float):
        return f"{value:.3g}"
    return str(value)


def _plan_text(new, stale, retried):
    return f"{new} new, {stale} with changed inputs, {retried} errors retried"


def _print_summary(run):
    from rich.table import Table

    table = Table(title=f"{run.n_homes} homes: {run.out}", title_justify="left")
    for name in ("quantity", "unit", "count", "mean", "p10", "p50", "p90"):
        if name == "quantity":
            table.add_column(name, no_wrap=True)
        else:
            table.add_column(name, justify="left" if name == "unit" else "right", overflow="fold")
    for rec in run.summary.to_dict("records"):
        table.add_row(*[_cell(rec.get(k)) for k in ("quantity", "unit", "count", "mean", "p10", "p50", "p90")])
    out_console.print(table)
    out_console.print(
        f"{run.n_run} homes calculated ({_plan_text(run.n_new, run.n_stale, run.n_retried)}), {run.n_skipped} kept "
        f"from before, errors: {run.n_errors}, in {run.seconds:.1f} s; summary in {run.summary_csv}", markup=False,
    )
    out_console.print(CAUTION, markup=False)


@app.command(epilog=EPILOG)
@guarded
def fleet(
    manifest: Annotated[Path, typer.Argument(help="Manifest of homes: CSV or TOML (docs/fleet.md).", exists=True, dir_okay=False, show_default=False)],
    out: Annotated[Path, typer.Option("--out", help="RESULTS.parquet to write (one row per home); an existing one is resumed.", dir_okay=False, rich_help_panel="Output")],
    workers: Annotated[Optional[int], typer.Option("--workers", min=1, help="Processes of the local pool; default: the number of CPUs.", rich_help_panel="Inputs")] = None,
    scheduler: Annotated[Optional[str], typer.Option("--scheduler", help="Address of a running Dask distributed scheduler, e.g. tcp://10.0.0.5:8786.", rich_help_panel="Inputs")] = None,
    model: Annotated[ModelChoice, typer.Option("--model", help="RC model for every home, or auto to compare the presets (see calibrate --help).", rich_help_panel="Model")] = ModelChoice.auto,
    gains: Annotated[GainsChoice, typer.Option("--gains", help="Unlogged internal gains: one constant; a day (07-23 h) and a night value; or four periods (06-09, 09-17, 17-23, 23-06 h).", rich_help_panel="Model")] = GainsChoice.constant,
    gains_hours: Annotated[Optional[str], typer.Option("--gains-hours", help=GAINS_HOURS_HELP, rich_help_panel="Model")] = None,
    test_days: Annotated[Optional[float], typer.Option("--test-days", help="Keep each log's last days back and report how each home's model predicts them (test_* columns).", rich_help_panel="Model")] = None,
    batch: Annotated[Optional[int], typer.Option("--batch", min=1, help="Homes sent out at a time (an interruption loses at most one batch); default: 8 per worker, at least 32.", rich_help_panel="Inputs")] = None,
    retry_errors: Annotated[bool, typer.Option("--retry-errors", help="On resume, calculate again the homes that ended in error.", rich_help_panel="Inputs")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", help="No progress bar and no summary table; errors only.", rich_help_panel="Output")] = False,
):
    """Calibrate every home of a manifest: one row of UA, time constants and fit per home, and a summary."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from thermorc.fleet import journal_path, run_fleet

    progress = Progress(
        TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TextColumn("errors: {task.fields[errors]}"),
        TimeRemainingColumn(), console=err_console, disable=quiet, transient=False,
    )
    task = {}

    def on_start(n, counts):
        label = "homes"
        if counts["kept"] or counts["stale"] or counts["retried"]:
            plan = _plan_text(counts["new"], counts["stale"], counts["retried"])
            label = f"homes ({counts['kept']} kept, {counts['stale']} changed, {counts['retried']} retried, {counts['new']} new)"
            if not quiet:
                # A plain line too: batch logs do not keep a progress bar's redraws.
                err_console.print(f"thermorc: resuming {out}: {counts['kept']} homes kept, {n} to calculate ({plan})",
                                  markup=False)
        task["id"] = progress.add_task(label, total=n, errors=0)
        task["errors"] = 0

    def on_row(row):
        task["errors"] += row["status"] == "error"
        progress.update(task["id"], advance=1, errors=task["errors"])

    try:
        with progress:
            run = run_fleet(
                manifest, out, workers=workers, scheduler=scheduler, model=model.value,
                gains=gains_option(gains.value, gains_hours), test_days=test_days, batch_size=batch, retry_errors=retry_errors,
                on_start=on_start, on_row=on_row,
            )
    except KeyboardInterrupt:
        fail(
            f"interrupted; {out} is unchanged, finished batches are kept in {journal_path(out)}: "
            "run the same command again to resume", 130,
        )
    if not quiet:
        _print_summary(run)
    elif run.n_errors:
        err_console.print(f"thermorc: {run.n_errors} of {run.n_run} homes failed; see the error column of {out}", markup=False)
