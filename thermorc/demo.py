"""
The end-to-end demo on the bundled, invented demo data (see weather_demo/README.md).

It runs the stages that exist in order and writes their outputs to one folder. Every number
it prints comes from the library; nothing here is computed twice.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

from thermorc.network import Network
from thermorc.simulate import simulate
from thermorc.write import write_csv, write_json

__all__ = ["run_demo"]


def _invented_week(start="2025-01-06", step_s=300, seed=7):
    """A week of invented winter weather and heating (demo only; not measured data)."""
    rng = np.random.default_rng(seed)
    n = 7 * 86400 // step_s
    index = pd.date_range(start, periods=n, freq=pd.Timedelta(seconds=step_s), tz="UTC")
    hours = np.arange(n) * step_s / 3600.0
    outdoor = -1.0 + 4.0 * np.sin(2 * np.pi * (hours - 9) / 24) + np.cumsum(rng.normal(0, 0.03, n))
    sun = np.clip(np.sin(2 * np.pi * (hours % 24 - 8) / 16), 0, None) * 350.0
    heating = np.where((hours % 24 >= 6.5) & (hours % 24 < 23), 4500.0, 1500.0)
    return pd.DataFrame(
        {"outdoor_c": outdoor, "heating_w": heating, "solar_w_m2": sun, "internal_w": 400.0}, index=index
    )


def run_demo(out_dir, log=print):
    """
    Run the demo and write its outputs to ``out_dir``.

    Parameters
    ----------
    out_dir : str or os.PathLike
        Output folder (created when missing).
    log : callable
        Receives one line of text per step.

    Returns
    -------
    dict
        What was found, also written to ``out_dir/demo_summary.json``.
    """
    os.makedirs(out_dir, exist_ok=True)
    net = Network.from_preset(
        "3R2C",
        r_indoor_envelope_k_per_w=0.0011,
        r_envelope_outdoor_k_per_w=0.0052,
        r_indoor_outdoor_k_per_w=0.021,
        c_indoor_j_per_k=4.0e6,
        c_envelope_j_per_k=3.6e7,
        solar_aperture_m2=4.5,
    )
    ua = net.heat_loss_coefficient_w_per_k()["total"]
    taus_h = net.time_constants_s() / 3600.0
    log(f"model 3R2C: heat loss coefficient {ua:.1f} W/K; time constants "
        + ", ".join(f"{t:.1f} h" for t in taus_h))
    inputs = _invented_week()
    sim = simulate(net, inputs, x0=[19.0, 12.0])
    frame = sim.to_frame()
    frame.index.name = "time"
    write_csv(os.path.join(out_dir, "demo_week.csv"), frame)
    indoor = sim.temperatures_c["indoor"]
    log(f"simulated one invented week ({len(inputs)} steps of 5 min): indoor {indoor.min():.1f} to {indoor.max():.1f} degC")
    summary = {
        "model": "3R2C",
        "heat_loss_coefficient_w_per_k": ua,
        "time_constants_h": list(taus_h),
        "indoor_min_c": float(indoor.min()),
        "indoor_max_c": float(indoor.max()),
        "note": "invented demo data; not a real home",
    }
    write_json(os.path.join(out_dir, "demo_summary.json"), summary)
    log(f"wrote {out_dir}/demo_week.csv and demo_summary.json")
    return summary
