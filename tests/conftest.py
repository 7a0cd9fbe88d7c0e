"""Shared fixtures and reference networks for the tests."""

import numpy as np
import pandas as pd
import pytest

from thermorc.network import Network


def random_preset(name, rng):
    """A preset with parameters drawn over the range of ordinary homes (common practice)."""
    ua = rng.uniform(80, 400)  # W/K
    c_total = rng.uniform(5e6, 6e7)  # J/K
    if name == "1R1C":
        return Network.from_preset(
            "1R1C", r_indoor_outdoor_k_per_w=1 / ua, c_indoor_j_per_k=c_total, solar_aperture_m2=rng.uniform(0, 8)
        )
    share_in = rng.uniform(0.05, 0.4)
    p = dict(
        r_indoor_envelope_k_per_w=1 / (ua * rng.uniform(3, 20)),
        r_envelope_outdoor_k_per_w=1 / ua,
        c_indoor_j_per_k=c_total * share_in,
        c_envelope_j_per_k=c_total * (1 - share_in),
        solar_aperture_m2=rng.uniform(0, 8),
        solar_to_envelope_share=rng.uniform(0, 1),
    )
    if name == "3R2C":
        p["r_indoor_outdoor_k_per_w"] = 1 / (ua * rng.uniform(0.1, 0.6))
    return Network.from_preset(name, p)


def random_inputs(network, n_rows, dt_s, rng, start="2025-01-01", tz="UTC"):
    """Smooth random weather and stepwise heating on a regular grid."""
    index = pd.date_range(start, periods=n_rows, freq=pd.Timedelta(seconds=dt_s), tz=tz)
    t_h = np.arange(n_rows) * dt_s / 3600
    data = {}
    for b in network.boundaries:
        data[b] = 2 + 6 * np.sin(2 * np.pi * (t_h - 15) / 24) + np.cumsum(rng.normal(0, 0.05, n_rows))
    for ch in network.input_channels:
        if ch.endswith("_w_m2"):
            data[ch] = np.clip(600 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None) * rng.uniform(0.3, 1)
        else:
            data[ch] = np.repeat(rng.uniform(0, 5000, n_rows // 6 + 1), 6)[:n_rows]
    return pd.DataFrame(data, index=index)


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
