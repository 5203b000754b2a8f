"""Tests of engine.forecast: trend fits, crossing dates and their intervals.

Every series here is synthetic, built from a known law, so the true crossing date is known
from first principles: for v = a·exp(b·t) it is t* = ln(L/a)/b, for v = c + m·t it is
t* = (L − c)/m.
"""

from __future__ import annotations

import json
import math
import time
from datetime import datetime

import numpy as np
import pytest
from scipy import stats

from engine.errors import InputError
from engine.forecast import MIN_POINTS, Forecast, forecast

DAY = 86400.0
T0 = 1_767_225_600.0   # 2026-01-01 00:00 UTC, s since 1970
WEEKS = np.arange(16.0)
DAYS = 7.0 * WEEKS     # one survey a week
TIMES = T0 + DAYS * DAY


def exp_series(rng, a=1.0, doubling_days=35.0, noise=0.05):
    """v = a·exp(b·t) with multiplicative noise of ``noise`` (relative, 1 σ)."""
    b = math.log(2.0) / doubling_days
    return a * np.exp(b * DAYS) * (1.0 + noise * rng.standard_normal(DAYS.size)), b


def test_exponential_growth_forecast_within_10_percent(rng):
    v, b = exp_series(rng)
    f = forecast(TIMES, v, alert=11.0, danger=16.0, recent=16)
    assert f.status == "forecast" and f.model == "exponential"
    true = T0 + math.log(16.0 / 1.0) / b * DAY    # first principles: t* = ln(L/a)/b, day 140
    assert abs(f.danger_date_s - true) <= 0.1 * (true - TIMES[-1])
    assert f.danger_low_s <= true <= f.danger_high_s
    assert TIMES[-1] < f.alert_date_s < f.danger_date_s
    # growth rate b per day, first principles; 5 % noise over 16 runs
    assert f.slope_per_day == pytest.approx(b, rel=0.1)
    assert "AICc" in f.reason and "exponential" in f.reason.lower()


def test_exponential_default_recent_runs(rng):
    v, b = exp_series(rng)
    f = forecast(TIMES, v, alert=None, danger=16.0)        # the last 8 runs
    true = T0 + math.log(16.0) / b * DAY                    # first principles
    assert f.model == "exponential" and f.points_used == 8
    assert f.danger_low_s <= true <= f.danger_high_s


def test_interval_coverage_is_near_90_percent():
    # First principles: a 90 % interval holds the true date in about 90 % of repeats.
    # 100 seeded repeats: binomial σ ≈ 3 %, so 80–98 % is about ±3 σ.
    hits = 0
    for seed in range(100):
        v, b = exp_series(np.random.default_rng(seed))
        f = forecast(TIMES, v, alert=None, danger=16.0, recent=16, seed=seed)
        hits += f.danger_low_s <= T0 + math.log(16.0) / b * DAY <= f.danger_high_s
    assert 80 <= hits <= 98


def test_linear_trend_chosen_and_within_10_percent(rng):
    c, m = 2.0, 0.05                                       # mm/s and mm/s per day
    v = c + m * DAYS + 0.1 * rng.standard_normal(DAYS.size)
    f = forecast(TIMES, v, alert=8.0, danger=12.0, recent=16)
    assert f.status == "forecast" and f.model == "linear"
    true = T0 + (12.0 - c) / m * DAY          # first principles: t* = (L − c)/m, day 200
    assert abs(f.danger_date_s - true) <= 0.1 * (true - TIMES[-1])
    assert f.danger_low_s <= true <= f.danger_high_s
    assert TIMES[-1] < f.alert_date_s < f.danger_date_s


def test_exact_linear_data_gives_the_algebraic_date_to_one_second():
    c, m = 1.3, 0.0417
    v = c + m * DAYS
    f = forecast(TIMES, v, alert=6.0, danger=9.0)
    assert f.model == "linear"
    for level, got in ((6.0, (f.alert_date_s, f.alert_low_s, f.alert_high_s)),
                       (9.0, (f.danger_date_s, f.danger_low_s, f.danger_high_s))):
        true = T0 + (level - c) / m * DAY                   # first principles
        for x in got:                                        # no noise: a zero-width interval
            assert abs(x - true) <= 1.0


def test_exact_exponential_data_gives_the_algebraic_date_to_one_second():
    a, b = 0.8, math.log(2.0) / 30.0
    f = forecast(TIMES, a * np.exp(b * DAYS), alert=None, danger=12.0)
    true = T0 + math.log(12.0 / a) / b * DAY                 # first principles: ln(L/a)/b
    assert f.model == "exponential"
    for x in (f.danger_date_s, f.danger_low_s, f.danger_high_s):
        assert abs(x - true) <= 1.0


def test_horizon_counts_from_now():
    v = 1.0 + 0.01 * DAYS                                   # danger 7.1 at day 610
    later = TIMES[-1] + 200 * DAY
    assert math.isnan(forecast(TIMES, v, alert=None, danger=7.1).danger_date_s)
    f = forecast(TIMES, v, alert=None, danger=7.1, now_s=later)
    assert abs(f.danger_date_s - (T0 + 610 * DAY)) <= 1.0    # first principles: (L − c)/m


def test_linear_slope_matches_numpy_polyfit(rng):
    v = 2.0 + 0.03 * DAYS + 0.05 * rng.standard_normal(DAYS.size)
    f = forecast(TIMES, v, alert=None, danger=20.0, recent=16)
    assert f.model == "linear"
    # reference: numpy.polyfit (least squares) and scipy.stats.linregress (slope's stderr)
    assert f.slope_per_day == pytest.approx(np.polyfit(DAYS, v, 1)[0], rel=1e-10)
    ref = stats.linregress(DAYS, v)
    assert f.slope_t == pytest.approx(ref.slope / ref.stderr, rel=1e-8)
    assert f.r2 == pytest.approx(ref.rvalue ** 2, rel=1e-10)


def test_exponential_rate_matches_polyfit_on_logs(rng):
    v, _ = exp_series(rng)
    f = forecast(TIMES, v, alert=None, danger=50.0, recent=16)
    # reference: numpy.polyfit of ln v against days (the log-linear least-squares fit)
    assert f.slope_per_day == pytest.approx(np.polyfit(DAYS, np.log(v), 1)[0], rel=1e-10)


def test_aicc_matches_scipy_likelihoods(rng):
    v, _ = exp_series(rng, noise=0.08)
    f = forecast(TIMES, v, alert=None, danger=50.0, recent=16)
    n, k = v.size, 3
    corr = 2 * k + 2 * k * (k + 1) / (n - k - 1)   # AICc, Burnham & Anderson (2002) ch. 2
    p = np.polyfit(DAYS, v, 1)
    mu = np.polyval(p, DAYS)
    sd = np.sqrt(np.mean((v - mu) ** 2))            # maximum-likelihood σ
    # reference: scipy.stats.norm / lognorm log densities of the same data in mm/s
    assert f.aicc_linear == pytest.approx(-2 * stats.norm.logpdf(v, mu, sd).sum() + corr,
                                          rel=1e-9)
    q = np.polyfit(DAYS, np.log(v), 1)
    mu_log = np.polyval(q, DAYS)
    s_log = np.sqrt(np.mean((np.log(v) - mu_log) ** 2))
    ll = stats.lognorm.logpdf(v, s=s_log, scale=np.exp(mu_log)).sum()
    assert f.aicc_exponential == pytest.approx(-2 * ll + corr, rel=1e-9)


def test_flat_noise_is_flat(rng):
    v = 3.0 + 0.1 * rng.standard_normal(DAYS.size)
    f = forecast(TIMES, v, alert=4.5, danger=7.1)
    assert f.status == "flat"
    assert math.isnan(f.danger_date_s) and math.isnan(f.alert_date_s)
    assert "flat" in f.reason and "includes zero" in f.reason


def test_falling_trend_is_falling(rng):
    v = 5.0 - 0.02 * DAYS + 0.1 * rng.standard_normal(DAYS.size)
    f = forecast(TIMES, v, alert=6.0, danger=8.0)
    assert f.status == "falling" and f.slope_per_day < 0
    assert math.isnan(f.danger_date_s)


def test_four_points_are_too_few():
    f = forecast(TIMES[:4], [1.0, 1.5, 2.0, 2.5], alert=4.0, danger=6.0)
    assert f.status == "too few points" and f.model == ""
    assert str(MIN_POINTS) in f.reason and math.isnan(f.danger_date_s)


def test_nan_values_are_dropped():
    v = 1.0 + 0.1 * DAYS[:6]
    with_nan = np.insert(v, 3, np.nan)
    t = np.insert(TIMES[:6], 3, TIMES[2] + 3 * DAY)
    a = forecast(t, with_nan, alert=None, danger=20.0)
    b = forecast(TIMES[:6], v, alert=None, danger=20.0)
    assert a.points_used == 6 and a.danger_date_s == pytest.approx(b.danger_date_s)
    few = forecast(TIMES[:5], [1.0, np.nan, 1.2, 1.3, 1.4], alert=None, danger=5.0)
    assert few.status == "too few points"


def test_already_above_danger():
    f = forecast(TIMES[:6], [1, 2, 3, 4, 5, 7.5], alert=4.5, danger=7.1)
    assert f.status == "already above" and "danger" in f.reason


def test_already_above_alert_still_forecasts_danger():
    v = 2.0 + 0.05 * DAYS
    f = forecast(TIMES, v, alert=5.0, danger=10.0)
    assert f.status == "forecast" and math.isnan(f.alert_date_s)
    assert math.isfinite(f.danger_date_s) and "Already above alert" in f.reason


def test_beyond_the_horizon_is_nan(rng):
    v = 1.0 + 0.002 * DAYS + 0.01 * rng.standard_normal(DAYS.size)
    f = forecast(TIMES, v, alert=1.5, danger=7.1, horizon_days=365.0)
    # first principles at 0.002 mm/s per day from 1.21 mm/s: alert (1.5) ≈ 145 days ahead,
    # danger (7.1) ≈ 2900 days ahead
    assert f.status == "forecast" and math.isnan(f.danger_date_s)
    assert math.isnan(f.danger_low_s) and math.isnan(f.danger_high_s)
    assert "Danger is beyond the horizon of 365 days" in f.reason
    assert TIMES[-1] < f.alert_date_s <= TIMES[-1] + 365 * DAY


def test_non_positive_values_use_linear_only():
    v = -1.0 + 0.1 * DAYS                    # first runs below zero
    f = forecast(TIMES, v, alert=12.0, danger=14.0, recent=16)
    assert f.model == "linear" and "exponential not tried" in f.reason
    assert math.isnan(f.aicc_exponential)


def test_close_models_take_the_sooner_crossing():
    # Five runs that curve only a little: the two AICc are within 2 of each other.
    v = np.array([1.00, 1.13, 1.24, 1.42, 1.55])
    f = forecast(TIMES[:5], v, alert=None, danger=4.0)
    assert abs(f.aicc_linear - f.aicc_exponential) < 2.0
    d = (TIMES[:5] - TIMES[4]) / DAY
    pl, pe = np.polyfit(d, v, 1), np.polyfit(d, np.log(v), 1)   # reference fits (numpy)
    lin_days, exp_days = (4.0 - pl[1]) / pl[0], (math.log(4.0) - pe[1]) / pe[0]
    assert f.model == ("exponential" if exp_days < lin_days else "linear")
    assert "about equally well" in f.reason


def test_weekly_survey_bearing_fault_brackets_danger_week():
    # Synthetic survey (invented, not measured): healthy 1.1 mm/s RMS with 5 % scatter for
    # weeks 0–7; from week 8 an outer-race fault makes the overall level grow as
    # 1.1·exp(b·(w − 8)), doubling every 3 weeks.  Danger 4.5 mm/s (ISO 20816-3 group 2,
    # rigid, zone C/D boundary, from memory).  The forecast made after week 12 fits the
    # runs since the rise began (weeks 8–12).
    b = math.log(2.0) / 3.0                                   # per week
    clean = 1.1 * np.exp(b * np.maximum(WEEKS - 8, 0))
    v = clean * (1.0 + 0.05 * np.random.default_rng(2026).standard_normal(16))
    true_week = 8 + math.log(4.5 / 1.1) / b                  # first principles: ≈ week 14.1
    above = int(np.argmax(v >= 4.5))                         # first survey at or above danger
    assert v[:above].max() < 4.5 <= v[above]
    f = forecast(TIMES[:13], v[:13], alert=2.8, danger=4.5, recent=5)
    assert f.status == "forecast" and f.model == "exponential"
    week = lambda s: (s - T0) / (7 * DAY)                     # noqa: E731
    lo, hi = week(f.danger_low_s), week(f.danger_high_s)
    assert lo <= true_week <= hi
    assert lo <= above and hi >= above - 1                   # overlaps the crossing week
    assert hi - lo < 3.0                                     # and is useful: under 3 weeks


def test_same_seed_repeats(rng):
    v, _ = exp_series(rng)
    a = forecast(TIMES, v, alert=11.0, danger=16.0, seed=7)
    b = forecast(TIMES, v, alert=11.0, danger=16.0, seed=7)
    assert (a.danger_low_s, a.danger_high_s) == (b.danger_low_s, b.danger_high_s)
    assert np.array_equal(a.curve_high, b.curve_high)


def test_curve_band_and_dict(rng):
    v, _ = exp_series(rng)
    f = forecast(TIMES, v, alert=11.0, danger=16.0)
    assert f.curve_t_s[0] == TIMES[-8] and f.curve_t_s[-1] > f.danger_high_s
    assert np.all(f.curve_low <= f.curve_value) and np.all(f.curve_value <= f.curve_high)
    assert np.all(np.diff(f.curve_value) > 0)
    d = f.as_dict()
    json.dumps(d, allow_nan=False)
    assert datetime.fromisoformat(d["danger_date"]).timestamp() == pytest.approx(
        f.danger_date_s, abs=1.0)
    assert d["status"] == "forecast" and len(d["curve_t_s"]) == f.curve_t_s.size
    empty = Forecast("too few points", "", "Only 2 valid run(s).", 2).as_dict()
    assert empty["danger_date"] == "" and empty["r2"] is None


def test_progress_and_speed(rng):
    v, _ = exp_series(rng)
    calls = []
    forecast(TIMES, v, alert=11.0, danger=16.0, progress=lambda *a: calls.append(a))
    assert [c[:2] for c in calls] == [(1, 3), (2, 3), (3, 3)]
    best = math.inf
    for _ in range(5):
        start = time.perf_counter()
        forecast(TIMES, v, alert=11.0, danger=16.0, n_boot=400)
        best = min(best, time.perf_counter() - start)
    assert best < 0.050


@pytest.mark.parametrize("kwargs, field", [
    ({"times_s": TIMES[:5], "values": [1, 2, 3]}, "times_s"),
    ({"times_s": [T0, math.nan, T0 + 2, T0 + 3, T0 + 4], "values": [1] * 5}, "times_s"),
    ({"values": [1, 2, math.inf, 4, 5]}, "infinite"),
    ({"alert": 5.0, "danger": 4.0}, "alert"),
    ({"recent": 3}, "recent"),
    ({"n_boot": 10}, "n_boot"),
    ({"horizon_days": 0}, "horizon_days"),
    ({"danger": "high"}, "danger"),
])
def test_bad_input_raises(kwargs, field):
    args = {"times_s": TIMES[:5], "values": [1.0, 1.1, 1.2, 1.3, 1.4], "alert": 2.0,
            "danger": 3.0, **kwargs}
    with pytest.raises(InputError, match=field):
        forecast(args.pop("times_s"), args.pop("values"), **args)
