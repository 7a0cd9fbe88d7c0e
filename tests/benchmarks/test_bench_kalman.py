"""Benchmark: one Kalman-filter log-likelihood on a month of 5-minute data (run on demand)."""

import math
import timeit

import numpy as np
import pytest

from thermorc.kalman import kalman_loglike, process_noise
from thermorc.network import Network
from thermorc.simulate import discretise

pytestmark = pytest.mark.benchmark


def _month(net, rng, dt_s=300.0):
    space = net.state_space()
    n = int(30 * 86400 / dt_s)  # 8,640 steps
    t_h = np.arange(n) * dt_s / 3600
    cols = {
        "outdoor_c": 4 + 6 * np.sin(2 * np.pi * (t_h - 15) / 24),
        "heating_w": np.repeat(rng.uniform(0, 2500, n // 6 + 1), 6)[:n],
        "solar_w_m2": np.clip(500 * np.sin(2 * np.pi * (t_h - 6) / 24), 0, None),
        "internal_w": np.full(n, 300.0),
    }
    u = np.column_stack([cols[name] for name in space.inputs])
    y = 20 + 0.5 * np.sin(2 * np.pi * t_h / 24) + rng.normal(0, 0.1, n)
    return space, u, y


@pytest.mark.parametrize("preset", ["2R2C", "3R2C"])
def test_month_of_5_minute_steps(preset):
    rng = np.random.default_rng(3)
    params = dict(r_indoor_envelope_k_per_w=0.0012, r_envelope_outdoor_k_per_w=0.005,
                  c_indoor_j_per_k=4e6, c_envelope_j_per_k=4e7, solar_aperture_m2=5.0)
    if preset == "3R2C":
        params.update(r_indoor_outdoor_k_per_w=0.025, solar_to_envelope_share=0.3)
    net = Network.from_preset(preset, **params)
    space, u, y = _month(net, rng)
    y[3000:3100] = np.nan  # one gap of a bit over 8 h
    dt = 300.0
    x0, p0 = np.array([20.0, 15.0]), np.diag([1.0, 4.0])

    def one_eval(steady_after=None):
        ad, b0, b1 = discretise(space.a, space.b, dt, "zoh")
        _, q_d = process_noise(space.a, [1e-6, 1e-7], dt)
        return kalman_loglike(ad, b0, b1, [1.0, 0.0], q_d, 0.01, y, u, x0, p0, steady_after=steady_after)

    fast, exact = one_eval(), one_eval(math.inf)  # compile (or load the numba cache) once
    # Best of 50 single calls: the least disturbed by other load on the machine.
    fast_s = min(timeit.repeat(one_eval, number=1, repeat=50))
    exact_s = min(timeit.repeat(lambda: one_eval(math.inf), number=1, repeat=50))
    rel = abs(fast.loglike - exact.loglike) / abs(exact.loglike)
    print(f"\n{preset}, {len(y)} steps, 2 states: {fast_s * 1e3:.2f} ms per log-likelihood "
          f"(steady-state switch, {fast.n_steady} of {fast.n_used} steps steady), "
          f"{exact_s * 1e3:.2f} ms time-varying throughout; relative difference {rel:.1e}")
    assert fast_s < 5e-3
    assert rel < 1e-6
