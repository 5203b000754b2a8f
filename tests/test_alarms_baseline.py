"""Statistical baselines: levels from known normal values, the Gaussian tail behind
k = 3, too few runs."""

import math

import numpy as np
import pytest
import scipy.stats

from engine.alarms.baseline import MIN_BASELINE_RUNS, band_statistics, baseline_plan
from engine.alarms.evaluate import evaluate_run
from engine.alarms.plan import AlarmPlan, Band
from engine.errors import InputError

TEMPLATE = AlarmPlan("P-101 motor DE", (
    Band("overall velocity", "overall", alert=2.8, danger=4.5),
    Band("1x", "band_rms", alert=2.0, danger=4.0, low=0.8, high=1.2, basis="order"),
    Band("kurtosis", "kurtosis", alert=4.0, danger=8.0, unit="1", scale=""),
), origin="ISO 20816-3 group 2, rigid (generic)")


def runs_from(rng, n):
    overall = rng.normal(1.2, 0.1, n)
    one_x = rng.normal(0.6, 0.05, n)
    kurt = rng.normal(3.0, 0.2, n)
    runs = [{"overall velocity": a, "1x": b, "kurtosis": c}
            for a, b, c in zip(overall, one_x, kurt)]
    return runs, {"overall velocity": overall, "1x": one_x, "kurtosis": kurt}


def test_sigma_levels_are_mean_plus_k_sigma(rng):
    # numpy as reference: mean and sample standard deviation (ddof=1).
    runs, columns = runs_from(rng, 20)
    plan = baseline_plan(TEMPLATE, runs)
    for name, col in columns.items():
        mean, sigma = float(np.mean(col)), float(np.std(col, ddof=1))
        b = plan.band(name)
        assert b.alert == pytest.approx(mean + 3 * sigma, rel=1e-12)
        assert b.danger == pytest.approx(mean + 6 * sigma, rel=1e-12)
    assert plan.origin == "baseline of 20 runs (sigma)"
    assert plan.name == "P-101 motor DE (baseline)"
    assert "n=20" in plan.note and "σ=" in plan.note
    # the bands themselves are kept
    assert [(b.name, b.measure, b.low, b.high, b.basis) for b in plan.bands] == [
        (b.name, b.measure, b.low, b.high, b.basis) for b in TEMPLATE.bands]
    custom = baseline_plan(TEMPLATE, runs, k=2.0, danger_k=4.0, name="learnt")
    col = columns["1x"]
    assert custom.band("1x").alert == pytest.approx(np.mean(col) + 2 * np.std(col, ddof=1))
    assert custom.name == "learnt"


def test_ratio_levels_are_multiples_of_the_mean(rng):
    runs, columns = runs_from(rng, 8)
    plan = baseline_plan(TEMPLATE, runs, method="ratio")
    for name, col in columns.items():
        assert plan.band(name).alert == pytest.approx(2.5 * np.mean(col), rel=1e-12)
        assert plan.band(name).danger == pytest.approx(5.0 * np.mean(col), rel=1e-12)
    # 2.5× and 5× are +8 dB and +14 dB over the normal level (common practice)
    assert 20 * math.log10(2.5) == pytest.approx(7.96, abs=0.01)
    assert 20 * math.log10(5.0) == pytest.approx(13.98, abs=0.01)
    assert plan.origin == "baseline of 8 runs (ratio)"
    other = baseline_plan(TEMPLATE, runs, method="ratio", alert_ratio=2.0, danger_ratio=4.0)
    assert other.band("1x").danger == pytest.approx(4.0 * np.mean(columns["1x"]))


def test_k3_false_alarm_rate_of_gaussian_values(rng):
    # One-sided Gaussian tail beyond 3σ: 1 − Φ(3) = 0.00135 (scipy.stats.norm as
    # reference; Abramowitz & Stegun Table 26.1).
    assert scipy.stats.norm.sf(3.0) == pytest.approx(0.00135, abs=1e-5)
    runs, _ = runs_from(rng, 200)
    plan = baseline_plan(TEMPLATE, runs)
    b = plan.band("overall velocity")
    healthy = rng.normal(1.2, 0.1, 200_000)
    rate = np.mean(healthy >= b.alert)
    # the baseline's own mean and σ from 200 runs are estimates, so the level is not
    # exactly 3σ of the population: the rate is the Gaussian tail at the level reached
    # (scipy.stats.norm as reference), and near 0.13 %
    expected = scipy.stats.norm.sf((b.alert - 1.2) / 0.1)
    assert rate == pytest.approx(expected, abs=4 * math.sqrt(expected / healthy.size))
    assert 0.0003 < rate < 0.005
    states = [evaluate_run(plan, {"overall velocity": v}).state for v in healthy[:2000]]
    assert states.count("danger") == 0


def test_nan_values_are_skipped_and_counted(rng):
    runs, columns = runs_from(rng, 7)
    runs[2]["1x"] = math.nan
    del runs[4]["1x"]
    stats = band_statistics(TEMPLATE, runs)
    kept = np.delete(columns["1x"], [2, 4])
    assert stats["1x"][0] == 5
    assert stats["1x"][1] == pytest.approx(np.mean(kept), rel=1e-12)
    assert stats["1x"][2] == pytest.approx(np.std(kept, ddof=1), rel=1e-12)
    plan = baseline_plan(TEMPLATE, runs)
    assert plan.band("1x").alert == pytest.approx(np.mean(kept) + 3 * np.std(kept, ddof=1))


def test_too_few_runs_or_useless_values_are_refused(rng):
    assert MIN_BASELINE_RUNS == 5
    runs, _ = runs_from(rng, MIN_BASELINE_RUNS - 1)
    with pytest.raises(InputError, match="band 'overall velocity': 4 run.*at least 5"):
        baseline_plan(TEMPLATE, runs)
    runs, _ = runs_from(rng, 6)
    for r in runs[:2]:
        r["kurtosis"] = math.nan
    with pytest.raises(InputError, match="band 'kurtosis': 4 run"):
        baseline_plan(TEMPLATE, runs)
    flat = [{"overall velocity": 1.0, "1x": 0.5, "kurtosis": 3.0} for _ in range(6)]
    with pytest.raises(InputError, match="σ = 0"):
        baseline_plan(TEMPLATE, flat)
    assert baseline_plan(TEMPLATE, flat, method="ratio").band("1x").alert == 1.25
    zero = [{"overall velocity": 0.0, "1x": 0.0, "kurtosis": 0.0} for _ in range(6)]
    with pytest.raises(InputError, match="positive mean"):
        baseline_plan(TEMPLATE, zero, method="ratio")
    runs, _ = runs_from(rng, 6)
    for kw, message in [({"method": "median"}, "method 'median'"),
                        ({"k": 6.0, "danger_k": 3.0}, "k 6 must be below danger_k 3"),
                        ({"k": -1.0}, "k must be a positive"),
                        ({"method": "ratio", "alert_ratio": 0.5}, "alert_ratio 0.5 must be"),
                        ({"method": "ratio", "danger_ratio": 2.0}, "below danger_ratio 2")]:
        with pytest.raises(InputError, match=message):
            baseline_plan(TEMPLATE, runs, **kw)
