"""Benchmarks of calibration (run on demand with `make bench`; they print their figures)."""

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.integrate
import scipy.optimize

from thermorc import estimate
from thermorc.errors import ThermorcWarning

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from test_estimate import stochastic_log

pytestmark = pytest.mark.benchmark


def _straightforward_fit(log, max_nfev):
    """2R2C fitted the plain way: solve_ivp for every residual, least_squares on log R, log C."""
    t = (log.index - log.index[0]).total_seconds().to_numpy()
    out, heat, ghi, y = (log[c].to_numpy() for c in ("outdoor_c", "heating_w", "ghi_w_m2", "indoor_c"))

    def simulate(theta):
        r1, r2, c1, c2, ap = np.exp(theta[:5])
        gains, x_env = theta[5], theta[6]

        def rhs(time, x):
            k = min(int(time // (t[1] - t[0])), len(t) - 2)
            w = (time - t[k]) / (t[1] - t[0])
            t_out = (1 - w) * out[k] + w * out[k + 1]
            q = heat[k] + gains + ap * ghi[k]
            return [((x[1] - x[0]) / r1 + q) / c1, ((x[0] - x[1]) / r1 + (t_out - x[1]) / r2) / c2]

        sol = scipy.integrate.solve_ivp(rhs, (t[0], t[-1]), [y[0], x_env], t_eval=t, rtol=1e-6, atol=1e-6,
                                        max_step=t[1] - t[0])
        return sol.y[0]

    start = np.r_[np.log([0.002, 0.004, 5e6, 2e7, 2.0]), 200.0, 10.0]
    sol = scipy.optimize.least_squares(lambda th: y - simulate(th), start, max_nfev=max_nfev, x_scale=1.0)
    return sol, float(np.sqrt(np.mean(sol.fun**2)))


def test_2r2c_year_of_15_minute_data_against_solve_ivp_fit():
    log, _, _ = stochastic_log(seed=4, days=365, step_s=900.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ThermorcWarning)
        estimate.calibrate(log.iloc[:2000], model="2R2C", energy_metrics=False)  # load the compiled loops
        start = time.perf_counter()
        ours = estimate.calibrate(log, model="2R2C", energy_metrics=False)
        ours_s = time.perf_counter() - start
    # Model runs of our fit: every trial R and C and every differenced Jacobian column is one
    # pass over the year (it yields the responses to all linear parameters at once). The plain
    # fit searches the same optimum over all seven parameters with finite differences, so it
    # needs at least as many simulations; it is capped (it would take hours): its cost per
    # simulation times our number of runs is a lower bound on its cost, and the RMSE it reached
    # by then shows it is nowhere near ours.
    runs = ours.extras["estimator"]["nfev"]
    start = time.perf_counter()
    plain, plain_rmse = _straightforward_fit(log, max_nfev=3)
    plain_s = time.perf_counter() - start
    plain_sims = plain.nfev + 7 * plain.njev
    per_sim = plain_s / plain_sims
    ratio = per_sim * runs / ours_s
    print(f"\n2R2C, one year of 15-min data: thermorc {ours_s:.2f} s for {runs} model runs "
          f"(RMSE {ours.fit['rmse_k']:.4f} K); solve_ivp + least_squares {per_sim:.2f} s per simulation, "
          f"so at least {per_sim * runs / 60:.0f} min for the same optimisation: {ratio:.0f}x "
          f"(its RMSE after {plain_sims} simulations: {plain_rmse:.3f} K)")
    assert ours.fit["rmse_k"] <= plain_rmse + 1e-6
    assert ratio >= 50


def test_auto_on_one_month_of_5_minute_data():
    log, _, _ = stochastic_log(seed=6, days=30, step_s=300.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ThermorcWarning)
        estimate.calibrate_auto(log.iloc[:2000])  # compile once
        start = time.perf_counter()
        res = estimate.calibrate_auto(log)
        secs = time.perf_counter() - start
    print(f"\n--model auto, one month of 5-min data ({len(log)} rows): {secs:.2f} s, chose {res.model}")
    assert secs < 2.0


@pytest.mark.parametrize("home, weather", [("light", None), ("heavy", None), ("heavy", "703165TY.csv")],
                         ids=["light", "heavy", "heavy-tmy3"])
def test_auto_on_one_month_of_a_fine_home(home, weather):
    # Fine homes of thermorc.synthetic: the heavy one's slow structure store brings the fourth
    # candidate, 4R3C, into auto (estimate.SLOW_STORE_TAU_H). Under the invented weather it
    # keeps the 2R2C; under the Sand Point AK TMY3 file pvlib ships (real open data), from
    # 10 February, it keeps the 4R3C: the dearest kind of fit in the fine-home survey.
    from thermorc import synthetic

    if weather is None:
        log, _ = synthetic.simulate_home(synthetic.fine_home(home), days=30, step_s=300, seed=3, warmup_days=45,
                                         start="2023-10-20")
    else:
        w, site, tz = synthetic.tmy3_weather(weather, "2023-02-10", 45, 31)
        log, _ = synthetic.simulate_home(synthetic.fine_home(home), weather=w, days=30, step_s=300, seed=1,
                                         warmup_days=45, site=site, tz=tz)
    data = estimate.calibration_data(log)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ThermorcWarning)
        estimate.calibrate_auto(estimate.calibration_data(log.iloc[:2000]))  # compile once
        start = time.process_time()
        res = estimate.calibrate_auto(data)
        secs = time.process_time() - start
    rows = res.extras["model_comparison"]["rows"]
    tried = [r["model"] for r in rows if "skipped" not in r]
    print(f"\n--model auto, one month of 5-min data, {home} fine home, {weather or 'invented weather'} ({len(log)} rows): "
          f"{secs:.2f} CPU-s, "
          f"tried {', '.join(tried)}, chose {res.model}")
    assert secs < 2.0
