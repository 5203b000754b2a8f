"""Alarm states: levels, severity order, bad data, history = run by run, events."""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from engine.alarms.evaluate import (SEVERITY, STATES, Event, evaluate_history, evaluate_run,
                                    state_changes, worst)
from engine.alarms.plan import AlarmPlan, Band
from engine.errors import InputError

PLAN = AlarmPlan("P-102 pump DE", (
    Band("overall velocity", "overall", alert=2.8, danger=4.5),
    Band("1x", "band_rms", alert=2.0, danger=4.0, low=0.8, high=1.2, basis="order"),
    Band("envelope BPFO", "defect", alert=0.02, danger=0.05, unit="g", scale="peak",
         defect="bpfo"),
))


def test_severity_order():
    order = sorted(SEVERITY, key=SEVERITY.get)
    assert order == ["", "no data", "ok", "bad data", "alert", "danger"]
    assert STATES == ("ok", "alert", "danger")
    assert worst(["ok", "no data", "alert", "bad data"]) == "alert"
    assert worst([]) == ""


def test_levels_and_excess():
    rs = evaluate_run(PLAN, {"overall velocity": 3.5, "1x": 4.4, "envelope BPFO": 0.01})
    assert rs.state == "danger"
    ov, one_x, env = rs.bands
    assert (ov.state, ov.level) == ("alert", 2.8)
    assert ov.excess == pytest.approx(3.5 / 2.8 - 1)  # 25 % above alert
    assert (one_x.state, one_x.level) == ("danger", 4.0)
    assert one_x.excess == pytest.approx(0.1)
    assert (env.state, env.level, env.excess) == ("ok", None, None)
    # at a level exactly: crossed, excess 0
    at = evaluate_run(PLAN, {"overall velocity": 2.8})
    assert at.band("overall velocity").state == "alert" and at.bands[0].excess == 0.0
    assert evaluate_run(PLAN, {"overall velocity": 2.7999}).bands[0].state == "ok"


def test_no_data_and_bad_data():
    rs = evaluate_run(PLAN, {"overall velocity": 1.0, "1x": math.nan})
    assert [b.state for b in rs.bands] == ["ok", "no data", "no data"]
    assert rs.state == "ok"  # a band without data does not hide the others
    assert evaluate_run(PLAN, {}).state == "no data"
    bad = evaluate_run(PLAN, {"overall velocity": 9.0, "1x": 9.0}, quality="error")
    assert bad.state == "bad data" and {b.state for b in bad.bands} == {"bad data"}
    assert bad.bands[0].value == 9.0 and bad.bands[0].level is None
    assert evaluate_run(PLAN, {"overall velocity": 3.0}, quality="warning").state == "alert"
    with pytest.raises(InputError, match="band '1x': value must be a number"):
        evaluate_run(PLAN, {"1x": "high"})


def test_run_state_as_dict_is_json():
    rs = evaluate_run(PLAN, {"overall velocity": 5.0, "1x": math.nan})
    d = json.loads(json.dumps(rs.as_dict(), allow_nan=False))
    assert d["state"] == "danger"
    assert d["bands"][0] == {"band": "overall velocity", "value": 5.0, "state": "danger",
                             "level": 4.5, "excess": pytest.approx(5.0 / 4.5 - 1)}
    assert d["bands"][1]["value"] is None


_values = st.one_of(st.just(math.nan), st.just(math.inf),
                    st.floats(min_value=0.0, max_value=6.0),
                    st.sampled_from([2.8, 4.5, 2.0, 4.0, 0.02, 0.05]))  # the levels exactly


@settings(max_examples=150, deadline=None)
@given(data=st.data(), n=st.integers(min_value=0, max_value=12))
def test_property_history_equals_run_by_run(data, n):
    values = {}
    for b in PLAN.bands:
        if data.draw(st.booleans()) or n == 0:
            values[b.name] = data.draw(hnp.arrays(float, n, elements=_values))
    quality = np.array(data.draw(st.lists(st.sampled_from(["ok", "warning", "error"]),
                                          min_size=n, max_size=n)), dtype=str)
    overall, bands = evaluate_history(PLAN, values, quality)
    assert overall.shape == (n,)
    for i in range(n):
        rs = evaluate_run(PLAN, {k: v[i] for k, v in values.items()}, quality=quality[i])
        assert overall[i] == rs.state
        for bs in rs.bands:
            assert bands[bs.band][i] == bs.state


def test_history_shapes_are_checked():
    with pytest.raises(InputError, match="one length"):
        evaluate_history(PLAN, {"1x": np.zeros(3)}, np.array(["ok"] * 4))
    overall, bands = evaluate_history(PLAN, {"1x": np.array([1.0, 3.0])}, None)
    assert overall.tolist() == ["ok", "alert"]
    assert bands["overall velocity"].tolist() == ["no data", "no data"]
    # quality as stored in HDF5 string columns (bytes)
    overall, _ = evaluate_history(PLAN, {"1x": np.array([3.0, 3.0])},
                                  np.array([b"error", b"ok"], dtype=object))
    assert overall.tolist() == ["bad data", "alert"]
    assert evaluate_run(PLAN, {"1x": 3.0}, quality=b"error").state == "bad data"


def history(values_1x, values_overall=None):
    n = len(values_1x)
    v = {"1x": np.array(values_1x, float),
         "overall velocity": np.array(values_overall if values_overall is not None
                                      else [1.0] * n, float),
         "envelope BPFO": np.full(n, 0.01)}
    overall, bands = evaluate_history(PLAN, v, np.array(["ok"] * n))
    return v, overall, bands


def test_one_event_per_change():
    v, overall, bands = history([1.0, 1.5, 2.5, 2.6, 4.2, 4.1, 1.0, 1.2])
    ids = [f"run-{i}" for i in range(8)]
    times = np.arange(8) * 7 * 86400.0
    events = state_changes("Demo Works/P-102/DE", ids, times, overall, bands, v, PLAN)
    assert [(e.run_id, e.previous, e.state) for e in events] == [
        ("run-0", "", "ok"), ("run-2", "ok", "alert"), ("run-4", "alert", "danger"),
        ("run-6", "danger", "ok")]
    alert, danger, back = events[1:]
    assert (alert.band, alert.value, alert.level) == ("1x", 2.5, 2.0)
    assert (danger.band, danger.value, danger.level) == ("1x", 4.2, 4.0)
    assert (back.band, back.value, back.level) == ("1x", 1.0, None)  # the alarm cleared
    assert not danger.acknowledged
    # with the state stored before, the first run is no change
    again = state_changes("p", ids, times, overall, bands, v, PLAN, previous="ok")
    assert [e.run_id for e in again] == ["run-2", "run-4", "run-6"]
    # runs given out of time order are taken in time order
    order = np.array([5, 0, 7, 2, 1, 6, 3, 4])
    shuffled = state_changes("p", [ids[i] for i in order], times[order], overall[order],
                             {k: s[order] for k, s in bands.items()},
                             {k: x[order] for k, x in v.items()}, PLAN)
    assert [(e.run_id, e.state) for e in shuffled] == [(e.run_id, e.state) for e in events]


def test_event_band_is_the_band_that_set_the_state():
    v, overall, bands = history([1.0, 1.0, 2.5], values_overall=[1.0, 3.0, 3.0])
    events = state_changes("p", ["a", "b", "c"], [0.0, 1.0, 2.0], overall, bands, v, PLAN)
    assert [(e.state, e.band) for e in events] == [("ok", "overall velocity"),
                                                   ("alert", "overall velocity")]
    bad = state_changes("p", ["a", "b"], [0.0, 1.0], np.array(["bad data", "no data"]),
                        {k: np.array(["bad data", "no data"]) for k in PLAN.band_names},
                        {k: np.array([math.nan, math.nan]) for k in PLAN.band_names}, PLAN)
    assert [(e.state, e.band, e.level) for e in bad] == [("bad data", "", None),
                                                         ("no data", "", None)]
    assert math.isnan(bad[0].value)


def test_event_acknowledge_and_dict_round_trip():
    v, overall, bands = history([1.0, 2.5])
    e = state_changes("p", ["a", "b"], [0.0, 100.0], overall, bands, v, PLAN)[-1]
    e.acknowledge("j.smith", 200.0, "planned bearing check")
    assert e.acknowledged and e.acknowledged_by == "j.smith"
    d = json.loads(json.dumps(e.as_dict(), allow_nan=False))
    assert Event.from_dict(d) == e
    fresh = Event("p", "r", 0.0, "", "", "no data", math.nan, None)
    back = Event.from_dict(json.loads(json.dumps(fresh.as_dict(), allow_nan=False)))
    assert math.isnan(back.value) and math.isnan(back.acknowledged_at)
    with pytest.raises(InputError, match="acknowledged_by"):
        e.acknowledge(" ", 1.0)


def test_state_changes_checks_its_input():
    v, overall, bands = history([1.0, 2.5])
    with pytest.raises(InputError, match="one length"):
        state_changes("p", ["a"], [0.0, 1.0], overall, bands, v, PLAN)
    with pytest.raises(InputError, match="band '1x'.*no states or values"):
        state_changes("p", ["a", "b"], [0.0, 1.0], overall,
                      {k: s for k, s in bands.items() if k != "1x"}, v, PLAN)
    with pytest.raises(InputError, match="previous state 'amber'"):
        state_changes("p", ["a", "b"], [0.0, 1.0], overall, bands, v, PLAN, previous="amber")
