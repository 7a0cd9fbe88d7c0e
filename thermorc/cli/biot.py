"""``thermorc biot``: U-values, capacities and the Biot check of a construction file."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from thermorc.cli._app import app
from thermorc.cli._common import guarded, out_console
from thermorc.errors import InputError
from thermorc.construction import analyse_construction, read_construction
from thermorc.iso13790 import capacity_class, network_from_construction
from thermorc.write import write_json

EPILOG = "Example: thermorc biot tests/data/construction_marrowby.toml --out biot.json"


def _fmt(value, spec):
    width = int(spec.split(".")[0] or 0)
    return "-".rjust(width) if value is None else format(value, spec)


def _table(report):
    lines = [f"Construction: {report['construction']}"]
    header = (f"{'element':<24} {'kind':<14} {'A m2':>7} {'U W/m2K':>8} {'kJ/m2K':>8} {'eff kJ/m2K':>10} "
              f"{'Bi':>8} {'lump?':>5} {'err %':>6}")
    lines += [header, "-" * len(header)]
    for e in report["elements"]:
        err = None if e["lumping_error"] is None else e["lumping_error"]["max_error_mean_pct"]
        ok = "-" if e["lumped_ok"] is None else ("yes" if e["lumped_ok"] else "no")
        lines.append(
            f"{e['name'][:24]:<24} {e['kind']:<14} {e['area_m2']:>7.1f} {_fmt(e['u_value_w_m2k'], '8.3f')} "
            f"{e['areal_capacity_j_m2k'] / 1000:>8.1f} {e['effective_areal_capacity_j_m2k'] / 1000:>10.1f} "
            f"{_fmt(e['biot'], '8.3g')} {ok:>5} {_fmt(err, '6.1f')}")
    w = report["whole_home"]
    lines += [
        "",
        f"Construction UA: {w['ua_w_per_k']:.1f} W/K = transmission {w['transmission_ua_w_per_k']:.1f} "
        f"(windows {w['windows_ua_w_per_k']:.1f}) + air leakage {w['air_leakage_w_per_k']:.1f} "
        f"({w['air_changes_per_h']:g} ach)",
        f"Daily effective capacity: {w['effective_capacity_j_per_k'] / 1e6:.2f} MJ/K; time constant "
        f"{w['time_constant_h']:.1f} h",
    ]
    iso = report.get("iso13790")
    if iso is not None and "error" not in iso:
        lines.append(f"ISO 13790 5R1C: C_m {iso['c_m_j_per_k'] / 1e6:.2f} MJ/K (Table 12 class: {iso['capacity_class']}), "
                     f"time constant {iso['time_constant_h']:.1f} h, heat loss from the air node "
                     f"{iso['heat_loss_coefficient_w_per_k']:.1f} W/K")
    rec = report["recommendation"]
    lines += ["", f"Suggested model: {rec['preset']}"]
    lines += [f"  {t}" for t in rec["text"]]
    lines += ["", "Per element:"]
    lines += [f"  {e['name']}: {e['recommendation']}" for e in report["elements"]]
    lines += ["", *(f"Caution: {c}" for c in report["cautions"])]
    return "\n".join(lines)


@app.command(epilog=EPILOG)
@guarded
def biot(
    construction: Annotated[Path, typer.Argument(
        exists=True, dir_okay=False, help="Construction file (TOML, see docs/constructions.md).", rich_help_panel="Inputs",
        show_default=False)],
    out: Annotated[Path, typer.Option(
        "--out", help="Where to write the report (JSON).", rich_help_panel="Output", dir_okay=False)],
    interval_min: Annotated[float, typer.Option(
        "--interval-min", min=1.0, max=1440.0, rich_help_panel="Model",
        help="Interval of the logs the model will be fitted to \\[min]; sets when the mass can share the "
             "air's node.")] = 60.0,
    as_json: Annotated[bool, typer.Option(
        "--json", help="Print the JSON report on stdout instead of the table.", rich_help_panel="Output")] = False,
):
    """Check a construction: U-values, heat capacities, Biot numbers and the model it supports."""
    home = read_construction(construction)
    report = analyse_construction(home, timestep_s=interval_min * 60.0)
    try:
        net, params = network_from_construction(home)
        report["iso13790"] = {
            **params.to_dict(),
            "capacity_class": capacity_class(params.c_m_j_per_k, home.floor_area_m2)["class"],
            "heat_loss_coefficient_w_per_k": net.heat_loss_coefficient_w_per_k("indoor")["total"],
        }
    except InputError as exc:  # a construction the 5R1C cannot take still gets its Biot report
        report["iso13790"] = {"error": str(exc)}
    write_json(out, report)
    if as_json:
        typer.echo(out.read_text(encoding="utf-8"), nl=False)
    else:
        out_console.print(_table(report), markup=False)
        out_console.print(f"\nWrote {out}", markup=False)

