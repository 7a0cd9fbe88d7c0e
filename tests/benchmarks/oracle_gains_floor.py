"""
Floor of the two-week open-loop prediction error that unlogged internal gains set, run on demand.

For each case of survey_fine_homes.py the fine model itself is run open loop with the
heating the thermostat used, the true weather and sun, and from its true state; only the
occupants' gains after the fitted four weeks are replaced by (a) their mean over those four
weeks (what ``--gains constant`` can know at best) or (b) their mean profile by hour and
weekday/weekend over those weeks. The RMSE against the same run with the true gains is what
even a perfect model, knowing the gains only on average, misses the predicted indoor
temperature by (both runs are one simulation, so its discretisation cancels).

    python tests/benchmarks/oracle_gains_floor.py real [light,well_insulated]
    python tests/benchmarks/oracle_gains_floor.py invented
"""

import os
import sys
import warnings

import numpy as np
import pandas as pd

sys.path.insert(0, os.path.dirname(__file__))
import survey_fine_homes  # noqa: E402

from thermorc import synthetic  # noqa: E402
from thermorc.network import modes_of  # noqa: E402
from thermorc.simulate import run_modes  # noqa: E402

N_FIT = 28 * survey_fine_homes.STEPS_PER_DAY


def _sensed(space, modes, u, x0, weights, step_s):
    """The sensor's reading at every control stamp (boundaries linear between stamps, heat held)."""
    foh = np.arange(u.shape[1]) < space.n_boundaries
    states = run_modes(space, u, np.full(len(u) - 1, step_s), x0, foh, means=False, modes=modes)[0]
    return states @ (weights @ space.c) + u @ (weights @ space.d)


def floor(home, weather_name, start, seed):
    """RMSE [K] of the two predicted weeks with the gains replaced (see the module docstring)."""
    spec = synthetic.fine_home(home)
    if weather_name == "invented":
        log, _, run = synthetic.simulate_home(spec, days=42, step_s=300, seed=seed, warmup_days=45, start=start,
                                              return_run=True)
    else:
        weather, site, tz = synthetic.tmy3_weather(weather_name, start, 45, 43)
        log, _, run = synthetic.simulate_home(spec, weather=weather, days=42, step_s=300, seed=seed, warmup_days=45,
                                              site=site, tz=tz, return_run=True)
    inputs = run["inputs"]
    space = run["network"].state_space()
    modes = modes_of(space)
    step_s = (inputs.index[1] - inputs.index[0]).total_seconds()
    first, split = inputs.index.get_indexer([log.index[0], log.index[N_FIT]])
    col = list(inputs.columns).index(synthetic.INTERNAL)
    fitted = inputs.iloc[first:split, col]
    profile = fitted.groupby([fitted.index.dayofweek >= 5, fitted.index.hour]).mean()
    after = inputs.index[split:]
    replaced = {"mean": np.full(len(after), fitted.mean()),
                "weekly_profile": profile.reindex(list(zip(after.dayofweek >= 5, after.hour))).to_numpy()}
    u = inputs.to_numpy()
    true = _sensed(space, modes, u, run["x0"], run["sensor_weights"], step_s)
    scored = inputs.index.get_indexer(log.index[N_FIT:])
    out = {}
    for label, gains in replaced.items():
        v = u.copy()
        v[split:, col] = gains
        err = _sensed(space, modes, v, run["x0"], run["sensor_weights"], step_s)[scored] - true[scored]
        out[label] = float(np.sqrt(np.mean(err**2)))
    return out


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    homes = argv[1].split(",") if len(argv) > 1 else None
    rows = []
    warnings.simplefilter("ignore")
    for case in survey_fine_homes.cases(argv[0]):
        if homes and case[0] not in homes:
            continue
        rows.append({"home": case[0], "weather": case[1][:3], "start": case[2], "seed": case[3], **floor(*case)})
        print(" ".join(f"{v:.3f}" if isinstance(v, float) else str(v) for v in rows[-1].values()), flush=True)
    frame = pd.DataFrame(rows)
    print(frame.groupby("home")[["mean", "weekly_profile"]].agg(["min", "median", "max"]).round(3).to_string())
    return 0


if __name__ == "__main__":
    sys.exit(main())
