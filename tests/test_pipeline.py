"""Analysis of stored runs, the results files, the value table, states and events."""

import math
import warnings
from datetime import UTC, datetime

import numpy as np
import pytest

from engine.alarms.plan import AlarmPlan, Band
from engine.analysis import PointSetup, analyse_recording
from engine.archive import create_archive, open_archive
from engine.archive.derived import VALUES_FILE
from engine.errors import EngineWarning
from engine.pipeline import analyse_runs, evaluate_points, point_setup, process_new_runs
from engine.recording import Channel, Recording
from engine.units import STANDARD_GRAVITY

FS = 25600.0
RPM = 1500.0
F1 = RPM / 60.0
T0 = 1_780_000_000.0


def sine_g(v_rms_mm_s: float, f_hz: float, seconds: float = 4.0, noise=0.0, seed=0):
    """Acceleration (g) of a velocity sine of ``v_rms_mm_s`` at ``f_hz``: a = √2·v·2πf / g_n
    (first principles; g_n = 9.80665 m/s², CGPM 1901)."""
    t = np.arange(int(FS * seconds)) / FS
    a_peak = v_rms_mm_s * math.sqrt(2.0) * 1e-3 * 2.0 * math.pi * f_hz / STANDARD_GRAVITY
    x = a_peak * np.sin(2.0 * math.pi * f_hz * t)
    if noise:
        x = x + np.random.default_rng(seed).normal(0.0, noise, t.size)
    return x


def recording(x, rpm=RPM):
    return Recording(fs_hz=FS, channels=[Channel(samples=x, unit="g", name="acc")], rpm=rpm)


def small_archive(tmp_path, values_mm_s, *, plan=None):
    path = tmp_path / "p.shaftwatch"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        with create_archive(path, plant_name="Test Works") as arc:
            arc.add_site("Test Works")
            arc.add_machine("Test Works", "K-1", nominal_rpm=RPM, iso_group=2,
                            foundation="rigid")
            arc.add_point("Test Works", "K-1", "DE H", direction="H", unit="g",
                          fmax_hz=1000.0, lines=800)
            if plan is not None:
                arc.set_plan("Test Works/K-1/DE H", plan)
            ids = [arc.import_recording(recording(sine_g(v, F1, noise=1e-4, seed=i)),
                                        "Test Works/K-1/DE H", taken=when(T0 + i * 7 * 86400.0),
                                        rpm=RPM, source=f"run{i}").run_id
                   for i, v in enumerate(values_mm_s)]
            process_new_runs(arc, ids)
    return path


def when(seconds: float) -> datetime:
    return datetime.fromtimestamp(seconds, UTC)


def test_one_x_and_overall_of_a_sine_are_its_velocity():
    # A pure 1× of 3 mm/s RMS: the 1× value, the overall level and the spectrum peak
    # all read 3 mm/s (first principles).
    setup = PointSetup(path="a/b/c", props={"fmax_hz": 1000.0, "lines": 800, "channel": -1})
    r = analyse_recording(recording(sine_g(3.0, F1)), setup, run_id="r", taken_s=T0, rpm=RPM)
    assert r.value("1x_mm_s") == pytest.approx(3.0, rel=0.01)
    assert r.value("overall_velocity_mm_s") == pytest.approx(3.0, rel=0.01)
    assert r.value("2x_mm_s") < 0.01
    assert r.spectrum.amplitude.max() == pytest.approx(3.0, rel=0.02)
    assert r.value("rpm") == RPM


def test_import_analyses_and_evaluates_with_the_iso_default(tmp_path):
    # ISO 20816-3 group 2 rigid (from memory of the standard's tables): B/C 2.8, C/D 4.5.
    path = small_archive(tmp_path, [1.0, 2.0, 3.5, 5.0])
    with open_archive(path) as arc:
        states = arc.point_states()["Test Works/K-1/DE H"]
        rows = arc.value_rows("Test Works/K-1/DE H")
        assert list(rows["state"]) == ["ok", "ok", "alert", "danger"]
        assert list(rows["zone"]) == ["A", "B", "C", "D"]
        assert states["state"] == "danger" and states["zone"] == "D"
        assert [r.state for r in sorted(arc.runs(), key=lambda r: r.taken_s)] == \
            ["ok", "ok", "alert", "danger"]
        ev = arc.events("Test Works/K-1/DE H")
        assert [(e.previous, e.state) for e in ev] == [("", "ok"), ("ok", "alert"),
                                                       ("alert", "danger")]
        assert ev[-1].level == pytest.approx(4.5)


def test_results_round_trip_and_value_table_rebuild(tmp_path):
    path = small_archive(tmp_path, [1.0, 2.0])
    with open_archive(path) as arc:
        rid = sorted(arc.runs(), key=lambda r: r.taken_s)[1].run_id
        stored = arc.results(rid)
        rec, _ = arc.read_run(rid)
        fresh = analyse_recording(rec, point_setup(arc, stored.point), run_id=rid,
                                  taken_s=stored.taken_s, rpm=RPM)
    assert stored.values == pytest.approx(fresh.values, nan_ok=True)
    # Stored as float32: relative error below 1e-6.
    np.testing.assert_allclose(stored.spectrum.amplitude, fresh.spectrum.amplitude,
                               rtol=1e-6, atol=1e-9)
    assert stored.findings == fresh.findings
    (path / VALUES_FILE).unlink()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        with open_archive(path, mode="w") as arc:
            # rebuilt from results/, states by evaluation
            evaluate_points(arc)
    with open_archive(path) as arc:
        assert list(arc.value_rows("Test Works/K-1/DE H")["state"]) == ["ok", "ok"]


def test_a_plan_change_re_evaluates_the_history_like_a_fresh_evaluation(tmp_path):
    path = small_archive(tmp_path, [1.0, 2.0, 3.0])
    tight = AlarmPlan(name="tight", bands=(
        Band(name="1x", measure="band_rms", alert=1.5, danger=2.5, low=0.9, high=1.1,
             basis="order"),))
    with open_archive(path, mode="w") as arc:
        arc.set_plan("Test Works/K-1/DE H", tight)
        out = evaluate_points(arc)
        assert out.remeasured == 3
    with open_archive(path) as arc:
        rows = arc.value_rows("Test Works/K-1/DE H")
        assert list(rows["state"]) == ["ok", "alert", "danger"]
        np.testing.assert_allclose(rows["band:1x"], [1.0, 2.0, 3.0], rtol=0.02)
    fresh = small_archive(tmp_path / "fresh", [1.0, 2.0, 3.0], plan=tight)
    with open_archive(fresh) as arc:
        assert list(arc.value_rows("Test Works/K-1/DE H")["state"]) == \
            ["ok", "alert", "danger"]


def test_rebuild_keeps_the_states(tmp_path):
    path = small_archive(tmp_path, [1.0, 5.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EngineWarning)
        with open_archive(path, mode="w") as arc:
            arc.rebuild()
    with open_archive(path) as arc:
        assert sorted(r.state for r in arc.runs()) == ["danger", "ok"]


def test_a_run_too_short_for_the_lines_is_a_problem_not_a_failure(tmp_path):
    path = small_archive(tmp_path, [1.0])
    with open_archive(path, mode="w") as arc:
        short = recording(sine_g(1.0, F1, seconds=0.02))
        res = arc.import_recording(short, "Test Works/K-1/DE H", taken=when(T0 + 1e6), rpm=RPM,
                                   source="short")
        out = process_new_runs(arc, [res.run_id])
        assert out.problems and out.problems[0]["run_id"] == res.run_id
        assert "Test Works/K-1/DE H" in out.problems[0]["reason"]
        assert arc.results(res.run_id) is None


def test_analyse_runs_stops_when_cancelled_and_keeps_what_is_done(tmp_path):
    from engine.pipeline import Stopped

    path = small_archive(tmp_path, [1.0, 2.0, 3.0])
    with open_archive(path, mode="w") as arc:
        ids = [r.run_id for r in arc.runs()]
        calls = []

        def cancel():
            calls.append(1)
            return len(calls) > 2

        with pytest.raises(Stopped, match="after 2 of 3"):
            analyse_runs(arc, ids, cancel=cancel)
