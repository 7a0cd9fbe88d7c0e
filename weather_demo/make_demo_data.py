"""
Make the demo data of thermorc: invented weather and an invented home in an invented town.

Quillhaven, its street and the home at 27 Larchmere Row are invented; so is every number in
the files written here. The weather comes from :func:`thermorc.synthetic.synthetic_weather`
(fronts, daily cycles and clouds over a pvlib clear sky) and the thermostat log from the fine
RC model of :mod:`thermorc.synthetic`. Fixed seeds make the files reproducible:

    .venv/bin/python weather_demo/make_demo_data.py            # rewrite the files here
    .venv/bin/python weather_demo/make_demo_data.py --out DIR  # write them elsewhere

Writes ``weather.csv`` (one year, hourly), ``log.csv`` (January and February, 5-minute),
``truth.json`` (the fine model's exact figures), ``site.toml`` and ``construction.toml``.
"""

from __future__ import annotations

import argparse
import os
import sys
from dataclasses import replace

import numpy as np
import pandas as pd

from thermorc.synthetic import (
    FACADES,
    LayerSpec,
    Thermostat,
    fine_home,
    layer,
    simulate_home,
    synthetic_weather,
)
from thermorc.write import write_json, write_text

SITE = {
    "name": "Quillhaven (invented town)",
    "latitude": 45.37,
    "longitude": -90.84,
    "altitude_m": 420.0,
    "tz": "America/Chicago",
}
YEAR = 2023
WEATHER_SEED = 20230101
HOME_SEED = 27
LOG_START = "2023-01-01"
LOG_DAYS = 59  # January and February
WARMUP_DAYS = 6


def demo_home():
    """The invented home at 27 Larchmere Row: moderately insulated masonry, two storeys."""
    return replace(
        fine_home("heavy"),
        name="27 Larchmere Row, Quillhaven (invented)",
        floor_area_m2=120.0,
        storeys=2,
        wall_layers=(layer("gypsum_1200", 0.015, name="plaster"),
                     layer("brick_face_ashrae_a2", 0.24, 4, name="brick"),
                     layer("eps", 0.06, 2, name="external insulation"),
                     layer("gypsum_1200", 0.01, name="render")),
        roof_layers=(layer("gypsum_plasterboard_900", 0.0125, name="ceiling board"),
                     layer("mineral_wool", 0.20, 2, name="loft insulation"),
                     layer("softwood_500", 0.022, name="loft boards")),
        floor_layers=(layer("concrete_medium_2000", 0.06, name="screed"),
                      layer("eps", 0.05, name="floor insulation"),
                      layer("concrete_medium_2200", 0.15, 2, name="slab")),
        window_u_w_m2k=1.6,
        window_g=0.6,
        air_changes_per_h=0.6,
        ground_c=8.0,
        thermostat=Thermostat(day_c=20.5, night_c=17.0, night_start_h=23.0, night_end_h=6.5,
                              capacity_w=10000.0),
    )


def _times(index):
    # ISO 8601 with the UTC offset, e.g. 2023-01-01T00:00:00-06:00.
    text = index.strftime("%Y-%m-%dT%H:%M:%S%z")
    return [t[:-2] + ":" + t[-2:] for t in text]


def _csv(frame, decimals, header_lines=()):
    out = frame.round(decimals).copy()
    out.insert(0, "time", _times(frame.index))
    body = out.to_csv(index=False, lineterminator="\n")
    return "".join(f"# {line}\n" for line in header_lines) + body


def _construction_toml(spec):
    """The home's construction file in the format of docs/constructions.md."""
    lines = [
        "# An invented home: 27 Larchmere Row, Quillhaven (an invented town). Every value here is",
        "# invented for the demo; it describes no real building. Written by make_demo_data.py from",
        "# the same description as the fine model; the soil under the floor is not part of this",
        "# format, so the floor here meets the ground through R_se (see docs/constructions.md).",
        f'name = "{spec.name}"',
        f"floor_area_m2 = {spec.floor_area_m2:.1f}",
        "",
        "[air_leakage]",
        f"ach = {spec.air_changes_per_h}",
        f"volume_m3 = {spec.volume_m3:.1f}",
    ]
    kinds = {"wall": "external_wall", "roof": "roof", "floor": "floor", "internal": "internal_mass"}
    for el in spec.elements():
        lines += ["", "[[elements]]", f'name = "{el.name}"', f'kind = "{kinds[el.kind]}"',
                  f"area_m2 = {el.area_m2:.2f}"]
        if el.name.startswith("wall_"):
            lines.append(f'orientation = "{el.name[-1].upper()}"')
        if el.kind == "roof":
            lines.append('orientation = "horizontal"')
        if el.kind == "internal":
            # The fine model holds half a partition seen from both faces over twice the area.
            lines[-1] = f"area_m2 = {el.area_m2 / 2:.2f}"
            lines.append("exposed_sides = 2")
        for lay in el.layers:
            if lay.name == "soil":
                continue
            thickness = 2 * lay.thickness_m if el.kind == "internal" else lay.thickness_m
            lines += ["  [[elements.layers]]", f'  name = "{lay.name}"', f"  thickness_m = {thickness:g}"]
            if lay.resistance_m2k_per_w is not None:
                r = 2 * lay.resistance_m2k_per_w if el.kind == "internal" else lay.resistance_m2k_per_w
                lines.append(f"  resistance_m2k_per_w = {r:g}")
            else:
                lines += [f"  conductivity_w_per_mk = {lay.conductivity_w_per_mk:g}",
                          f"  density_kg_per_m3 = {lay.density_kg_per_m3:g}",
                          f"  specific_heat_j_per_kgk = {lay.specific_heat_j_per_kgk:g}"]
    for f in FACADES:
        area = spec.window_area_m2(f)
        if area > 0:
            lines += ["", "[[elements]]", f'name = "windows_{f}"', 'kind = "window"', f"area_m2 = {area:.2f}",
                      f'orientation = "{f.upper()}"', f"u_value_w_m2k = {spec.window_u_w_m2k}",
                      f"g_value = {spec.window_g}"]
    return "\n".join(lines) + "\n"


def _site_toml():
    return (
        "# Quillhaven is an invented town; these coordinates were made up for the demo.\n"
        f'name = "{SITE["name"]}"\n'
        f'latitude = {SITE["latitude"]}\n'
        f'longitude = {SITE["longitude"]}\n'
        f'altitude_m = {SITE["altitude_m"]}\n'
        f'tz = "{SITE["tz"]}"\n'
    )


def make(out_dir):
    """Write the demo files into ``out_dir``; return the truth dictionary."""
    tz = SITE["tz"]
    site = (SITE["latitude"], SITE["longitude"], SITE["altitude_m"])
    # Five-minute invented weather from a few days before the year to its end; the hourly
    # file and the log are both cut from it, so they agree where they overlap.
    start = pd.Timestamp(f"{YEAR}-01-01", tz=tz) - pd.Timedelta(days=WARMUP_DAYS)
    end = pd.Timestamp(f"{YEAR + 1}-01-01", tz=tz)
    days = (end - start) / pd.Timedelta(days=1)
    fine = synthetic_weather(start, days + 1 / 24, 300.0, *site, tz=tz, seed=WEATHER_SEED, climate="cold_winter")

    year = fine.loc[(fine.index >= pd.Timestamp(f"{YEAR}-01-01", tz=tz)) & (fine.index < end)]
    hourly = year[["outdoor_c", "wind_m_s"]].loc[year.index.minute == 0]
    means = year[["ghi_w_m2", "dni_w_m2", "dhi_w_m2"]].resample("h").mean()
    hourly = hourly.join(means)[["outdoor_c", "ghi_w_m2", "dni_w_m2", "dhi_w_m2", "wind_m_s"]]
    header = [
        "Invented weather for the invented town of Quillhaven: generated by",
        "thermorc.synthetic.synthetic_weather, not measured anywhere.",
        f"name = {SITE['name']}",
        f"latitude = {SITE['latitude']}",
        f"longitude = {SITE['longitude']}",
        f"altitude_m = {SITE['altitude_m']}",
        "outdoor_c and wind_m_s at the stamp; irradiance the mean of the hour starting at the stamp",
    ]
    write_text(os.path.join(out_dir, "weather.csv"), _csv(hourly, {"outdoor_c": 1, "wind_m_s": 1, "ghi_w_m2": 1,
                                                                    "dni_w_m2": 1, "dhi_w_m2": 1}, header))

    spec = demo_home()
    log, truth = simulate_home(spec, fine, days=LOG_DAYS, step_s=300.0, seed=HOME_SEED, site=site,
                               warmup_days=WARMUP_DAYS)
    write_text(os.path.join(out_dir, "log.csv"),
               _csv(log, {"indoor_c": 1, "heating_w": 0, "outdoor_c": 2, "ghi_w_m2": 1, "setpoint_c": 1}))
    truth.update({
        "note": "exact figures of the invented fine model behind log.csv (invented home, town and data)",
        "site": SITE,
        "weather_seed": WEATHER_SEED,
        "home_seed": HOME_SEED,
        "log_start": log.index[0].isoformat(),
        "log_end": log.index[-1].isoformat(),
    })
    write_json(os.path.join(out_dir, "truth.json"), truth)
    write_text(os.path.join(out_dir, "site.toml"), _site_toml())
    write_text(os.path.join(out_dir, "construction.toml"), _construction_toml(spec))
    return truth


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[1])
    parser.add_argument("--out", default=os.path.dirname(os.path.abspath(__file__)),
                        help="folder to write into (default: beside this script)")
    args = parser.parse_args(argv)
    truth = make(args.out)
    print(f"UA {truth['heat_loss_coefficient_w_per_k']:.1f} W/K, relevant time constant "
          f"{truth['time_constant_relevant_h']:.1f} h, heating {truth['heating_energy_kwh']:.0f} kWh "
          f"in {truth['days']:.0f} days -> {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
