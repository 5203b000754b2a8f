"""Alarms, trends and forecasts on the Demo Works plant (engine.demo_plant), and the
ISO 20816-3 zone boundaries as the status command shows them.

The demo's story (engine.demo_plant): P-102's pump drive-end bearing fails from week 8
(overall velocity designed to pass 2.8 mm/s at week 11.5 and 4.5 mm/s at week 14.5),
F-201's fan 1× grows, B-301's 2× jumps after the motor change of week 10, P-101 and
G-401 stay healthy.  Weeks are found from engine.demo_plant.PLANT.taken.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from _trend_helpers import SITE, add_run, new_archive

from engine.alarms.evaluate import evaluate_run
from engine.alarms.measure import MeasureInput, measure_plan
from engine.alarms.plan import AlarmPlan, Band, write_plan_file
from engine.archive import open_archive
from engine.archive.derived import EVENTS_FILE, VALUES_FILE
from engine.cli import main
from engine.demo_plant import PLANT
from engine.pipeline import evaluate_points
from engine.trends import compare, read_trend_csv, spectra_by_date, trend

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
SITE_D = PLANT.site
P102 = f"{SITE_D}/P-102/pump DE H"
P102V = f"{SITE_D}/P-102/pump DE V"
OVERALL = "overall_velocity_mm_s"


def week_of(tag: str, point: str, time_s: float) -> int:
    """The survey week of a run of the demo plant, from PLANT.taken."""
    for w in range(1, PLANT.weeks + 1):
        if abs(PLANT.taken(tag, point, w).timestamp() - time_s) < 60.0:
            return w
    raise AssertionError(f"{time_s} is not a survey time of {tag} {point}")


def test_p102_goes_into_alert_before_danger(demo_archive_path):
    with open_archive(demo_archive_path) as arc:
        events = arc.events(P102)
    alarms = [(e.state, week_of("P-102", "pump DE H", e.time_s)) for e in events
              if e.state in ("alert", "danger")]
    assert [s for s, _ in alarms][:2] == ["alert", "danger"]
    assert alarms[0][1] < alarms[1][1]
    assert alarms[0][1] == 12 and alarms[1][1] == 15   # the demo's story: weeks 12 and 15


def test_forecast_at_week_12_brackets_the_week_danger_is_crossed(demo_archive_path):
    """Bracket rule: weekly surveys only say that the value crossed danger between the
    last run below it and the first run at or above it; the forecast made with the runs
    up to week 12 passes when its 90 % danger interval overlaps that week."""
    week12 = PLANT.taken("P-102", "pump DE H", 12).timestamp()
    with open_archive(demo_archive_path) as arc:
        then = trend(arc, P102, OVERALL, until_s=week12)
        full = trend(arc, P102, OVERALL, forecast=False)
    f = then.forecast
    assert then.times_s.max() == week12 and f.status == "forecast"
    first = int(np.argmax(full.values >= full.danger))
    assert full.values[first] >= full.danger > full.values[first - 1]
    crossed_after, crossed_by = full.times_s[first - 1], full.times_s[first]
    assert week_of("P-102", "pump DE H", crossed_by) == 15
    assert f.danger_low_s <= crossed_by and f.danger_high_s >= crossed_after
    assert "after the value last sat inside its baseline band" in f.reason


def test_f201_fan_1x_band_rises(demo_archive_path):
    with open_archive(demo_archive_path) as arc:
        td = trend(arc, f"{SITE_D}/F-201/fan DE H", "band:1x")
    assert td.unit == "mm/s RMS" and td.alert is not None
    assert td.forecast.slope_per_day > 0
    assert td.forecast.status not in ("flat", "falling")


@pytest.mark.parametrize("point", ["blower DE H", "blower DE A"])
def test_b301_2x_band_jumps_at_week_10(demo_archive_path, point):
    with open_archive(demo_archive_path) as arc:
        td = trend(arc, f"{SITE_D}/B-301/{point}", "band:2x", forecast=False)
    weeks = np.array([week_of("B-301", point, t) for t in td.times_s])
    ratio = td.values[weeks >= 10].mean() / td.values[weeks <= 9].mean()
    assert ratio > 2.5
    assert set(np.array(td.states)[weeks >= 10]) == {"alert"}


@pytest.mark.parametrize("tag", ["P-101", "G-401"])
def test_healthy_machines_stay_ok_at_every_run(demo_archive_path, tag):
    with open_archive(demo_archive_path) as arc:
        for p in PLANT.machine(tag).points:
            td = trend(arc, f"{SITE_D}/{tag}/{p.name}", OVERALL, forecast=False)
            assert td.times_s.size == PLANT.weeks and set(td.states) == {"ok"}


def test_trend_csv_round_trip_on_the_demo(demo_archive_path, tmp_path):
    with open_archive(demo_archive_path) as arc:
        td = trend(arc, P102, OVERALL)
    path = td.to_csv(tmp_path / "p102.csv")
    head = path.read_text(encoding="utf-8").splitlines()[:4]
    assert head[1:] == [f"# point: {P102}", f"# value: {OVERALL}", "# unit: mm/s RMS"]
    back = read_trend_csv(path)
    np.testing.assert_array_equal(back.times_s, td.times_s)
    np.testing.assert_array_equal(back.values, td.values)
    assert (back.states, back.zones, back.run_ids) == (td.states, td.zones, td.run_ids)
    assert (back.alert, back.danger) == (td.alert, td.danger)


def test_waterfall_in_orders_lines_up_1x_across_speeds(demo_archive_path):
    with open_archive(demo_archive_path) as arc:
        w = spectra_by_date(arc, f"{SITE_D}/M-501/mixer DE H", orders=True)
    assert np.ptp(w.rpm) > 25.0                       # runs between about 1180 and 1220 rpm
    one = int(np.flatnonzero(w.axis == 1.0)[0])
    assert list(np.nanargmax(w.matrix, axis=1)) == [one] * len(w.run_ids)
    # The run-up of week 16 has no single speed: left out and listed.
    assert [x["reason"] for x in w.left_out] == ["no shaft speed (rpm)"]


def test_compare_a_demo_run_with_itself_is_0_db(demo_archive_path):
    with open_archive(demo_archive_path) as arc:
        rid = arc.value_rows(P102)["run_id"][-1]
        c = compare(arc, rid, rid)
        base = compare(arc, rid)
    assert np.all(c.db == 0.0)                        # first principles: 20·log10(1) = 0
    assert max(r["db"] for r in base.rises) > 20.0    # the bearing defect, against baseline


# -- re-evaluation after a plan change --------------------------------------------------
CHANGED = AlarmPlan("P-102 pump changed", (
    Band("overall velocity", "overall", alert=2.0, danger=3.5),
    Band("bearing zone", "band_rms", alert=0.3, danger=1.0, low=80.0, high=95.0),
    Band("1x", "band_rms", alert=1.5, danger=3.0, low=0.9, high=1.1, basis="order")))


def _states_events(path, points):
    with open_archive(path) as arc:
        states = {p: dict(zip(arc.value_rows(p)["run_id"], arc.value_rows(p)["state"]))
                  for p in points}
        events = [(e.point, e.run_id, e.previous, e.state, e.band) for e in arc.events()
                  if e.point in points]
    return states, events


def test_re_evaluation_after_a_plan_change_equals_evaluating_from_scratch(
        demo_archive_copy, tmp_path):
    plan_file = tmp_path / "changed.json"
    write_plan_file(CHANGED, plan_file)
    points = [P102, P102V]
    assert main(["plan", str(demo_archive_copy), P102, "--file", str(plan_file),
                 "--copy-to", P102V]) == 1
    states, events = _states_events(demo_archive_copy, points)
    # From scratch, run by run: band values measured afresh from the stored spectra,
    # each run evaluated on its own (evaluate_run, not the history evaluation).
    with open_archive(demo_archive_copy) as arc:
        for p in points:
            for rid, state in states[p].items():
                r = arc.results(rid)
                values = measure_plan(CHANGED, MeasureInput(
                    velocity=r.spectrum, envelope=r.envelope,
                    overall_velocity_mm_s=r.value(OVERALL), rpm=r.rpm))
                assert evaluate_run(CHANGED, values, quality=r.quality).state == state
    # From scratch, whole history: the value table and the event log removed (values
    # rebuilt from the results files, no states, no events), then evaluated.
    (demo_archive_copy / VALUES_FILE).unlink()
    (demo_archive_copy / EVENTS_FILE).unlink()
    with open_archive(demo_archive_copy, mode="w") as arc:
        assert set(arc.value_rows(P102)["state"]) == {""}
        evaluate_points(arc, points)
    assert _states_events(demo_archive_copy, points) == (states, events)
    assert set(states[P102].values()) >= {"ok", "alert", "danger"}


# -- ISO 20816-3 boundaries through the status command ----------------------------------
#: From memory of ISO 20816-3's tables: A/B, B/C, C/D in mm/s RMS by group and support.
ISO_TABLE = {(1, "rigid"): (2.3, 4.5, 7.1), (1, "flexible"): (3.5, 7.1, 11.0),
             (2, "rigid"): (1.4, 2.8, 4.5), (2, "flexible"): (2.3, 4.5, 7.1)}
SIDES = {"below AB": (0, -1, "A"), "above AB": (0, 1, "B"), "below BC": (1, -1, "B"),
         "above BC": (1, 1, "C"), "below CD": (2, -1, "C"), "above CD": (2, 1, "D")}
STATE_OF_ZONE = {"A": "ok", "B": "ok", "C": "alert", "D": "danger"}


def test_iso_boundaries_through_the_status_zone_column(tmp_path, capsys):
    path = tmp_path / "iso.shaftwatch"
    machines = {f"M{g}{f[0]}": (g, f, list(SIDES)) for g, f in ISO_TABLE}
    expected = {}
    with new_archive(path, machines) as arc:
        for tag, (g, f, names) in machines.items():
            for name in names:
                which, side, zone = SIDES[name]
                v = ISO_TABLE[(g, f)][which] * (1 + 0.01 * side)   # 1 % either side
                add_run(arc, f"{SITE}/{tag}/{name}", 1, values={OVERALL: v})
                expected[f"{SITE}/{tag}/{name}"] = zone
        evaluate_points(arc)
    assert main(["status", str(path), "--json"]) == 1
    rows = {r["point"]: r for r in json.loads(capsys.readouterr().out)["points"]}
    assert {p: r["zone"] for p, r in rows.items()} == expected
    assert {p: r["state"] for p, r in rows.items()} == {
        p: STATE_OF_ZONE[z] for p, z in expected.items()}
    assert all(math.isfinite(r["overall_mm_s"]) for r in rows.values())


# -- exit status on the demo ------------------------------------------------------------
def test_cli_exit_status_on_the_demo(demo_archive_path, tmp_path, capsys):
    demo = str(demo_archive_path)
    assert main(["status", demo]) == 1                       # P-102 and B-301 in alarm
    assert main(["trend", demo, "--point", f"{SITE_D}/P-101/pump DE H", "--value",
                 OVERALL]) == 0
    bad = tmp_path / "not-a-plan.toml"
    bad.write_text("format = 'shaftwatch-alarm-plan'\nversion = [\n")
    capsys.readouterr()
    assert main(["plan", demo, P102, "--file", str(bad)]) == 2
    assert "not-a-plan.toml" in capsys.readouterr().err
