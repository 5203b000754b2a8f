"""engine.trends and engine.trend_spectra on small archives whose results we choose.

Expected numbers come from first principles (an exact exponential's crossing date, the
dB of an amplitude ratio, the power mean), from memory of ISO 20816-3's zone table, or
from the rule the module documents applied by hand to values written here.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from _trend_helpers import (SITE, add_run, line_spectrum, new_archive, tone_spectrum,
                            week_time)

from engine.alarms.plan import AlarmPlan, Band
from engine.errors import InputError
from engine.forecast import MIN_POINTS, RECENT_POINTS
from engine.pipeline import evaluate_points
from engine.trend_spectra import peak_hold_resample
from engine.trends import (compare, fit_window, read_trend_csv, spectra_by_date, trend,
                           value_levels)

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
POINT = f"{SITE}/K-1/DE H"
OTHER = f"{SITE}/K-1/DE V"
DAY = 86400.0
BASE = [1.00, 1.02, 0.98, 1.01, 0.99]          # σ = 0.0158 mm/s, 3σ = 0.047 mm/s
B_PER_DAY = math.log(2.0) / 28.0               # doubling every four weeks


def rising_values() -> list[float]:
    """Weeks 1–6 healthy (week 6 = 1.00, inside the baseline band), then an exact
    exponential from week 6: v = exp(b·τ), τ days after week 6, doubling in 4 weeks."""
    return BASE + [1.00] + [math.exp(B_PER_DAY * 7.0 * k) for k in range(1, 7)]


@pytest.fixture(scope="module")
def rising(tmp_path_factory):
    """K-1 (ISO group 2, rigid) with twelve weekly runs of rising overall velocity
    (tests only read it)."""
    path = tmp_path_factory.mktemp("rise") / "rise.shaftwatch"
    arc = new_archive(path, {"K-1": (2, "rigid", ["DE H", "DE V"])})
    with arc:
        for w, v in enumerate(rising_values(), start=1):
            add_run(arc, POINT, w, values={"overall_velocity_mm_s": v, "crest_factor": 3.0})
        evaluate_points(arc)
    return path


def open_r(path):
    from engine.archive import open_archive

    return open_archive(path)


# -- the fit window ---------------------------------------------------------------------
def test_fit_window_starts_after_the_last_run_inside_the_baseline_band():
    v = np.array(rising_values())
    t = np.arange(v.size) * 7 * DAY
    w = fit_window(t, v, unit="mm/s RMS")
    # By hand: band 1.00 ± 0.047; week 6 (index 5, 1.00) is the last inside, so the fit
    # takes the six runs from index 6 on.
    assert (w.start, w.count, w.rule) == (6, 6, "since baseline")
    assert w.baseline_low == pytest.approx(1.0 - 3 * np.std(BASE, ddof=1))
    assert "after the value last sat inside its baseline band" in w.text


def test_fit_window_reaches_back_to_the_fewest_points_and_keeps_the_default_in_band():
    v = np.array(BASE + [1.0, 1.0, 1.0, 1.0, 2.0, 2.5])   # only two runs outside
    t = np.arange(v.size) * 7 * DAY
    w = fit_window(t, v)
    assert (w.start, w.count) == (v.size - MIN_POINTS, MIN_POINTS)
    healthy = np.array(BASE * 3)                           # the latest run is inside
    w = fit_window(np.arange(healthy.size) * DAY, healthy)
    assert (w.rule, w.count) == ("in baseline", RECENT_POINTS)
    w = fit_window(t, v, recent=7)
    assert (w.start, w.count, w.rule) == (v.size - 7, 7, "latest")
    with pytest.raises(InputError, match="recent"):
        fit_window(t, v, recent=MIN_POINTS - 1)


def test_automatic_window_forecasts_an_exact_exponential_on_time(rising):
    with open_r(rising) as arc:
        td = trend(arc, POINT, "overall_velocity_mm_s")
        late = trend(arc, POINT, "overall_velocity_mm_s", recent=8)
    # First principles: v = exp(b·τ) reaches 4.5 at τ* = ln(4.5)/b days after week 6.
    true = week_time(6).timestamp() + math.log(4.5) / B_PER_DAY * DAY
    f = td.forecast
    assert f.status == "forecast" and f.model == "exponential"
    assert abs(f.danger_date_s - true) < 3600.0
    assert f.reason.startswith("Fit window: the 6 runs from 2026-02-16")
    # The healthy weeks 5 and 6 in the fit flatten it, so that forecast comes late.
    assert late.forecast.danger_date_s > true + 2 * DAY


def test_until_keeps_only_the_runs_up_to_that_date(rising):
    until = week_time(9).timestamp()
    with open_r(rising) as arc:
        td = trend(arc, POINT, "overall_velocity_mm_s", until_s=until)
        with pytest.raises(InputError, match="until_s"):
            trend(arc, POINT, "overall_velocity_mm_s", until_s=math.nan)
    assert td.times_s.size == 9 and td.times_s.max() <= until
    assert td.forecast.points_used == MIN_POINTS     # weeks 7–9 reach back to five runs


# -- levels, units, zones ---------------------------------------------------------------
def test_levels_units_and_zones(rising):
    plan = AlarmPlan("K-1 DE H", (
        Band("overall velocity", "overall", alert=2.8, danger=4.5),
        Band("hf", "band_peak", alert=0.5, danger=1.0, unit="g", scale="peak", low=500.0,
             high=900.0),
        Band("crest", "crest_factor", alert=5.0, danger=7.0, unit="1", scale="")))
    assert value_levels(plan, "overall_velocity_mm_s") == ("mm/s RMS", 2.8, 4.5,
                                                           "overall velocity")
    assert value_levels(plan, "band:hf") == ("g 0-peak", 0.5, 1.0, "hf")
    assert value_levels(plan, "crest_factor") == ("1", 5.0, 7.0, "crest")
    assert value_levels(plan, "1x_mm_s") == ("mm/s RMS", None, None, "")
    with pytest.raises(InputError, match="no band 'nope'"):
        value_levels(plan, "band:nope")
    with pytest.raises(InputError, match="not known"):
        value_levels(plan, "speed")
    with open_r(rising) as arc:
        td = trend(arc, POINT, "overall_velocity_mm_s", forecast=False)
        with pytest.raises(InputError, match="no alarm plan|no band"):
            trend(arc, POINT, "band:1x")
    # The machine's ISO default (group 2, rigid): alert 2.8, danger 4.5 mm/s (from memory
    # of ISO 20816-3's table; zone C from 2.8, D from 4.5, A below 1.4).
    assert (td.alert, td.danger, td.unit) == (2.8, 4.5, "mm/s RMS") and td.forecast is None
    expected = ["A" if v < 1.4 else "B" if v < 2.8 else "C" if v < 4.5 else "D"
                for v in rising_values()]
    assert td.zones == expected
    assert td.states == ["alert" if z == "C" else "ok" for z in expected]


def test_as_dict_has_exactly_the_documented_keys(rising):
    with open_r(rising) as arc:
        d = trend(arc, POINT, "overall_velocity_mm_s").as_dict()
    json.dumps(d, allow_nan=False)
    assert set(d) == {"time", "value", "unit", "alert", "danger", "forecast"}
    assert d["time"][0] == "2026-01-05T08:00:00+00:00" and d["value"][0] == 1.0
    f = d["forecast"]
    for key in ("status", "model", "reason", "alert_date", "alert_interval", "danger_date",
                "danger_interval"):
        assert key in f
    assert f["alert_date"] is None              # already above alert at the last run
    lo, hi = f["danger_interval"]
    assert lo <= f["danger_date"] <= hi


def test_csv_round_trip_keeps_every_digit_and_nan(rising, tmp_path):
    with open_r(rising) as arc:
        td = trend(arc, POINT, "overall_velocity_mm_s", forecast=False)
    td.values[3] = math.nan
    back = read_trend_csv(td.to_csv(tmp_path / "t.csv"))
    assert (back.point, back.value, back.unit, back.alert, back.danger) == (
        POINT, "overall_velocity_mm_s", "mm/s RMS", 2.8, 4.5)
    np.testing.assert_array_equal(back.times_s, td.times_s)
    np.testing.assert_array_equal(back.values, td.values)       # NaN where NaN
    assert (back.states, back.zones, back.run_ids) == (td.states, td.zones, td.run_ids)
    bad = tmp_path / "bad.csv"
    bad.write_text("# point: x\n# value: y\n# unit: z\ntime,value,state,zone,run_id\n"
                   "yesterday,1,ok,A,r\n")
    with pytest.raises(InputError, match="bad.csv: line 5"):
        read_trend_csv(bad)


# -- waterfall --------------------------------------------------------------------------
def test_peak_hold_resample_keeps_peaks_and_interpolates_empty_bins():
    x = np.arange(11.0)
    a = np.array([0, 1, 5, 1, 0, 0, 2, 0, 0, 3, 0], dtype=float)
    coarse = peak_hold_resample(x, a, np.arange(0.0, 11.0, 2.0))   # bins [-1,1), [1,3), …
    np.testing.assert_array_equal(coarse, [0, 5, 1, 2, 0, 3])       # max of each bin
    fine = peak_hold_resample(x, a, np.arange(0.0, 12.0, 0.25))
    assert fine[8] == 5.0 and fine[9] == pytest.approx(4.0)         # 5 − 0.25·(5 − 1)
    assert np.isnan(fine[-4:]).all()                                # beyond the last line


@pytest.fixture
def speeds(tmp_path):
    """Runs at 1234, 1777 and 2950 rpm with 1× (2 mm/s) and 2× (0.7 mm/s), and one run
    without a speed."""
    path = tmp_path / "speeds.shaftwatch"
    with new_archive(path, {"K-1": (2, "rigid", ["DE H"])}) as arc:
        for w, rpm in enumerate((1234.0, 1777.0, 2950.0), start=1):
            add_run(arc, POINT, w, rpm=rpm, values={"rpm": rpm},
                    spectrum=tone_spectrum({rpm / 60: 2.0, 2 * rpm / 60: 0.7}, seed=w))
        add_run(arc, POINT, 4, spectrum=tone_spectrum({25.0: 1.0}, seed=4))
    return path


def test_waterfall_in_orders_puts_1x_and_2x_of_every_speed_in_one_bin(speeds):
    with open_r(speeds) as arc:
        w = spectra_by_date(arc, POINT, orders=True)
        own = [arc.results(r).spectrum.amplitude for r in w.run_ids]
        hz = spectra_by_date(arc, POINT)
    step = w.axis[1] - w.axis[0]
    # Twice the coarsest line spacing: 2 × 1.25 Hz / (1234/60 Hz) = 0.122 order → 1/8.
    assert step == pytest.approx(1 / 8) and w.axis_unit == "order"
    one, two = int(round(1 / step)), int(round(2 / step))
    assert len(w.run_ids) == 3 and w.left_out[0]["reason"] == "no shaft speed (rpm)"
    assert list(np.nanargmax(w.matrix, axis=1)) == [one] * 3
    for row, amp in zip(w.matrix, own):
        assert row[one] == pytest.approx(amp.max())                # peak held, not summed
        second = row[two - 3:two + 4]
        assert np.argmax(second) == 3                              # 2× in the 2× bin
    assert hz.matrix.shape == (4, 801) and hz.axis[-1] == pytest.approx(1000.0)
    with pytest.raises(InputError, match="orders=True"):
        spectra_by_date(open_r(speeds), POINT, bins=100)


# -- compare ----------------------------------------------------------------------------
@pytest.fixture
def lines(tmp_path):
    """Runs whose spectra hold exactly chosen amplitudes (mm/s RMS per line)."""
    path = tmp_path / "lines.shaftwatch"
    a = np.zeros(41)
    a[8], a[16], a[24] = 1.0, 0.5, 0.25
    peaks = [{"frequency_hz": 20.0, "amplitude": 2.0, "order": 1.0,
              "sources": [{"name": "motor 1×", "kind": "order"}]}]
    ids = {}
    with new_archive(path, {"K-1": (2, "rigid", ["DE H", "DE V"])}) as arc:
        ids["a"] = add_run(arc, POINT, 1, spectrum=line_spectrum(a))
        ids["b"] = add_run(arc, POINT, 2, spectrum=line_spectrum(3 * a))
        double = a.copy()
        double[16] = 2 * a[16]
        ids["c"] = add_run(arc, POINT, 3, spectrum=line_spectrum(double), peaks=peaks)
        ids["short"] = add_run(arc, POINT, 4, spectrum=line_spectrum(a[:21]))
        ids["other"] = add_run(arc, OTHER, 1, spectrum=line_spectrum(a))
    return path, ids


def test_compare_of_a_run_with_itself_is_0_db_everywhere(lines):
    path, ids = lines
    with open_r(path) as arc:
        c = compare(arc, ids["c"], ids["c"])
    assert np.all(c.db == 0.0) and c.rises == []      # first principles: log10(1) = 0


def test_compare_gives_20_log10_of_the_ratio_and_names_the_source(lines):
    path, ids = lines
    with open_r(path) as arc:
        c = compare(arc, ids["c"], ids["a"])
        base = compare(arc, ids["a"], baseline_runs=2)
        with pytest.raises(InputError, match="lines"):
            compare(arc, ids["short"], ids["a"])
        with pytest.raises(InputError, match="not of"):
            compare(arc, ids["a"], ids["other"])
    # First principles: 20·log10(2) = 6.0206 dB at the doubled line (20 Hz), 0 elsewhere.
    assert c.db[16] == pytest.approx(20 * math.log10(2.0), abs=1e-9)
    assert np.count_nonzero(c.db) == 1
    assert c.rises == [{"frequency_hz": 20.0, "current": 1.0, "reference": 0.5,
                        "db": pytest.approx(6.0206, abs=1e-4), "source": "motor 1×"}]
    # Baseline of runs a and 3a averaged in power: √((1² + 3²)/2) = √5 at line 8.
    assert base.reference_runs == [ids["a"], ids["b"]]
    assert base.reference_amplitude[8] == pytest.approx(math.sqrt(5.0), rel=1e-12)
    assert base.db[8] == pytest.approx(20 * math.log10(1 / math.sqrt(5.0)), abs=1e-9)
