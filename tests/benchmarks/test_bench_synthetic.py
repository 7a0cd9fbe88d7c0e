"""Speed goal of the synthetic-home generator: 4 weeks of 5-minute data from a ~50-state
fine model in well under 2 s (run with `make bench`)."""

import time

import pytest

from thermorc.synthetic import build_fine_network, fine_home, simulate_home


@pytest.mark.benchmark
def test_four_weeks_of_five_minute_data_from_a_fifty_state_home():
    spec = fine_home("heavy")
    assert len(build_fine_network(spec).state_space().states) >= 50
    simulate_home(spec, days=2, seed=0)  # compile the loop once
    t0 = time.perf_counter()
    log, _ = simulate_home(spec, days=28, seed=0)
    elapsed = time.perf_counter() - t0
    print(f"\nsimulate_home, heavy preset, 28 days of 5-minute data: {elapsed:.2f} s ({len(log)} rows)")
    assert len(log) == 28 * 288
    assert elapsed < 2.0
