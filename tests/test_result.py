"""RESULT.json container: round trip, rebuilding the model, checked reading."""


import numpy as np
import pandas as pd
import pytest

from thermorc.errors import InputError
from thermorc.result import CalibrationResult
from thermorc.write import write_json


def example_result():
    params = {
        "r_indoor_envelope_k_per_w": 0.001,
        "r_envelope_outdoor_k_per_w": 0.005,
        "c_indoor_j_per_k": 3e6,
        "c_envelope_j_per_k": 3e7,
        "solar_aperture_m2": 4.0,
        "solar_to_envelope_share": 0.0,
        "internal_gains_w": 350.0,
    }
    names = ["r_indoor_envelope_k_per_w", "r_envelope_outdoor_k_per_w", "c_indoor_j_per_k", "c_envelope_j_per_k"]
    cov = np.diag([0.05, 0.02, 0.1, 0.08]) ** 2
    return CalibrationResult(
        model="2R2C", parameters=params, heat_loss_coefficient_w_per_k=1 / 0.006,
        time_constants_h=[40.0, 0.5], capacitance_j_per_k=3.3e7,
        fit={"rmse_k": 0.1, "cv_rmse_pct": 12.0, "nmbe_pct": 1.0, "n_samples": 8000},
        covariance={"names": names, "space": "log", "matrix": cov.tolist()},
    )


def test_round_trip_and_network(tmp_path):
    res = example_result()
    path = tmp_path / "RESULT.json"
    write_json(path, res.to_dict())
    back = CalibrationResult.from_json(path)
    assert back.parameters == res.parameters
    assert back.fit["n_samples"] == 8000
    # Series resistances: UA = 1 / (R1 + R2) (steady conduction, Ohm's-law analogy).
    assert back.network().heat_loss_coefficient_w_per_k()["total"] == pytest.approx(1 / 0.006)
    gains = back.internal_gains_w(pd.date_range("2025-01-01", periods=3, freq="h", tz="UTC"))
    assert (gains == 350.0).all()


def test_draws_are_lognormal_with_the_stated_spread():
    # A log-normal draw has the standard deviation of log(value) given by the covariance.
    draws = example_result().parameter_draws(4000, seed=3)
    logs = np.log([d["c_indoor_j_per_k"] for d in draws])
    assert np.std(logs) == pytest.approx(0.1, rel=0.05)
    assert np.exp(np.median(logs)) == pytest.approx(3e6, rel=0.02)
    assert draws[0]["internal_gains_w"] == 350.0
    assert example_result().parameter_draws(5, seed=1) == example_result().parameter_draws(5, seed=1)


@pytest.mark.parametrize(
    "text, match",
    [
        ("{", "invalid JSON"),
        ("[]", "JSON object"),
        ('{"model": "9R9C", "parameters": {}}', "expected one of"),
        ('{"model": "1R1C", "parameters": {"r_indoor_outdoor_k_per_w": "x"}}', "not a finite number"),
        ('{"model": "1R1C", "parameters": {"r_indoor_outdoor_k_per_w": 0.01}}', "needs parameter"),
        ('{"model": "1R1C", "parameters": {"r_indoor_outdoor_k_per_w": -0.01, "c_indoor_j_per_k": 1e7}}', "expected > 0"),
    ],
)
def test_bad_result_files_are_refused_with_location(tmp_path, text, match):
    path = tmp_path / "bad.json"
    path.write_text(text)
    with pytest.raises(InputError, match=match) as info:
        CalibrationResult.from_json(path)
    assert str(info.value).startswith("bad.json")
