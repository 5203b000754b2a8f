"""The alarm and trend commands (plan, evaluate, status, events, trend, waterfall,
compare) through engine.cli.main, on a small archive whose results we choose.

Exit status: 0 when every state shown is ok, 1 when any is alert or danger, 2 on bad
input.
"""

from __future__ import annotations

import json
import math
import shutil

import numpy as np
import pytest
from _trend_helpers import SITE, add_run, new_archive, tone_spectrum

from engine.alarms.plan import AlarmPlan, Band, read_plan_file, write_plan_file
from engine.archive import open_archive
from engine.cli import main
from engine.pipeline import evaluate_points
from engine.trends import read_trend_csv

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
H = f"{SITE}/K-1/DE H"
V = f"{SITE}/K-1/DE V"
BARE = f"{SITE}/N-1/DE H"      # a machine without ISO group and foundation
RPM = 1480.0
ONE_X = [1.0, 1.1, 0.9, 1.05, 0.95, 1.0]        # 1× velocity of DE H, mm/s RMS, weeks 1–6


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """K-1 (ISO group 2, rigid): DE H and DE V with six weekly runs at 1480 rpm (1× tone
    of ONE_X, overall 1.2 × that), all in zone A/B and ok; N-1 without ISO group."""
    path = tmp_path_factory.mktemp("cli") / "small.shaftwatch"
    with new_archive(path, {"K-1": (2, "rigid", ["DE H", "DE V"]),
                            "N-1": (None, None, ["DE H"])}) as arc:
        for w, a in enumerate(ONE_X, start=1):
            for point, scale, minutes in ((H, 1.0, 0), (V, 0.8, 4), (BARE, 1.0, 8)):
                add_run(arc, point, w, rpm=RPM, minutes=minutes,
                        values={"overall_velocity_mm_s": 1.2 * a * scale, "rpm": RPM},
                        spectrum=tone_spectrum({RPM / 60: a * scale}, seed=w))
        evaluate_points(arc)
    return path


@pytest.fixture
def small(built, tmp_path):
    dst = tmp_path / "copy.shaftwatch"
    shutil.copytree(built, dst)
    return str(dst)


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    captured = capsys.readouterr()
    return code, json.loads(captured.out) if captured.out.strip() else None


def states_of(path, point):
    with open_archive(path) as arc:
        return list(arc.value_rows(point)["state"])


def low_plan(alert=0.8, danger=1.3):
    return AlarmPlan("low overall", (Band("overall velocity", "overall", alert=alert,
                                          danger=danger),))


# -- status and evaluate ----------------------------------------------------------------
def test_status_is_0_when_all_ok_and_1_with_an_alert_worst_first(small, capsys):
    code, d = run_json(capsys, ["status", small])
    assert code == 0 and "Generic limits" in d["note"]
    assert {r["point"]: r["state"] for r in d["points"]} == {H: "ok", V: "ok", BARE: ""}
    assert all(r["zone"] in "AB" for r in d["points"] if r["point"] != BARE)
    with open_archive(small, mode="w") as arc:
        add_run(arc, V, 7, rpm=RPM, values={"overall_velocity_mm_s": 3.0})  # zone C
    code, d = run_json(capsys, ["evaluate", small, "--point", V])
    # Before: the latest run (new, not evaluated yet) has no state.
    assert code == 1 and d["changed"] == {V: {"before": "", "now": "alert"}}
    code, d = run_json(capsys, ["status", small])
    assert code == 1 and d["points"][0]["point"] == V
    assert (d["points"][0]["state"], d["points"][0]["zone"]) == ("alert", "C")
    assert main(["status", small]) == 1
    out = capsys.readouterr().out
    assert "ISO 20816-3" in out and out.index("DE V") < out.index("DE H")


def test_evaluate_since_records_only_later_runs_and_rejects_a_bad_date(small, capsys):
    code, d = run_json(capsys, ["evaluate", small, "--since", "2026-02-01"])
    assert code == 0 and d["runs"] == 2 * 3        # weeks 5 and 6 (Feb 2 and 9) × 3 points
    assert main(["evaluate", small, "--since", "soon"]) == 2
    assert "--since" in capsys.readouterr().err


# -- plan -------------------------------------------------------------------------------
def test_plan_shows_the_iso_default_when_the_point_has_none(small, capsys):
    code, d = run_json(capsys, ["plan", small, H])
    assert code == 0 and d["own_plan"] is False and d["set_for"] == []
    # ISO 20816-3 group 2, rigid: B/C 2.8, C/D 4.5 mm/s (from memory of its table).
    band = d["plan"]["bands"][0]
    assert (band["alert"], band["danger"]) == (2.8, 4.5)
    assert main(["plan", small, H]) == 0
    assert "default, not stored" in capsys.readouterr().out


def test_plan_file_sets_and_re_evaluates_then_exports(small, tmp_path, capsys):
    f = tmp_path / "low.json"
    write_plan_file(low_plan(), f)
    code = main(["plan", small, H, "--file", str(f)])
    out = capsys.readouterr().out
    assert code == 1 and f"{H}: ok → alert" in out
    # The overall values 1.2·ONE_X are all ≥ 0.8 (alert); only week 2's 1.32 ≥ 1.3.
    expected = ["alert" if 1.2 * a < 1.3 else "danger" for a in ONE_X]
    assert states_of(small, H) == expected
    exported = tmp_path / "out.toml"
    code, d = run_json(capsys, ["plan", small, H, "--export", str(exported)])
    assert code == 1 and d["own_plan"] is True
    assert read_plan_file(exported).bands == low_plan().bands


def test_bad_plan_file_is_2_names_the_file_and_changes_nothing(small, tmp_path, capsys):
    f = tmp_path / "broken.json"
    f.write_text('{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "x", '
                 '"bands": [{"name": "o", "measure": "overall", "alert": 5, "danger": 2}]}}')
    before = states_of(small, H)
    assert main(["plan", small, H, "--file", str(f)]) == 2
    err = capsys.readouterr().err
    assert "broken.json" in err and "alert" in err
    assert states_of(small, H) == before
    with open_archive(small) as arc:
        assert arc.plan(H) is None


def test_defaults_need_the_machine_group(small, capsys):
    assert main(["plan", small, BARE, "--defaults"]) == 2
    assert "N-1" in capsys.readouterr().err
    code, d = run_json(capsys, ["plan", small, H, "--defaults"])
    assert code == 0 and d["own_plan"] is True and d["changed"] == {}
    assert d["before_now"] == {H: {"before": "ok", "now": "ok"}}
    assert main(["plan", small, H, "--k", "3"]) == 2
    assert "--baseline" in capsys.readouterr().err


def test_baseline_learns_band_levels_and_keeps_iso_levels(small, tmp_path, capsys):
    f = tmp_path / "bands.toml"
    write_plan_file(AlarmPlan("K-1 DE H", (
        Band("overall velocity", "overall", alert=2.8, danger=4.5),
        Band("1x", "band_rms", alert=9.0, danger=10.0, low=0.8, high=1.2, basis="order"))), f)
    assert main(["plan", small, H, "--file", str(f)]) == 0
    code = main(["plan", small, H, "--baseline", "--first", "5", "--method", "ratio"])
    out = capsys.readouterr().out
    assert code == 0 and "kept the ISO 20816-3 levels of band 'overall velocity'" in out
    with open_archive(small) as arc:
        plan = arc.plan(H)
    iso, one = plan.bands
    assert (iso.alert, iso.danger) == (2.8, 4.5)
    # A Hann-windowed tone wholly inside a band reads its RMS (Heinzel et al. 2002, band
    # power over the ENBW); ratio method: alert = 2.5 × mean, danger = 5 × mean.
    mean = float(np.mean(ONE_X[:5]))
    assert one.alert == pytest.approx(2.5 * mean, rel=2e-3)
    assert one.danger == pytest.approx(5.0 * mean, rel=2e-3)
    assert main(["plan", small, H, "--baseline"]) == 2
    assert "--first" in capsys.readouterr().err


def test_copy_to_gives_other_points_the_same_plan(small, tmp_path, capsys):
    f = tmp_path / "low.json"
    write_plan_file(low_plan(alert=0.5, danger=0.9), f)
    code, d = run_json(capsys, ["plan", small, H, "--file", str(f), "--copy-to", V])
    assert code == 1 and d["set_for"] == [H, V]
    assert d["changed"] == {H: {"before": "ok", "now": "danger"},
                            V: {"before": "ok", "now": "danger"}}
    with open_archive(small) as arc:
        assert arc.plan(V) == arc.plan(H)


# -- events -----------------------------------------------------------------------------
def test_events_list_and_acknowledge(small, tmp_path, capsys):
    f = tmp_path / "low.json"
    write_plan_file(low_plan(), f)
    main(["plan", small, H, "--file", str(f)])
    capsys.readouterr()
    code, d = run_json(capsys, ["events", small, "--point", H])
    assert code == 1
    assert [(e["previous"], e["state"]) for e in d["events"]] == [
        ("", "alert"), ("alert", "danger"), ("danger", "alert")]
    i = d["events"][1]["index"]
    code, d = run_json(capsys, ["events", small, "--ack", str(i), "--by", "A. Fitter",
                                "--note", "bearing ordered"])
    assert code == 1 and d["events"][0]["acknowledged_by"] == "A. Fitter"
    with open_archive(small) as arc:
        assert arc.events()[i].note == "bearing ordered"
    assert main(["events", small, "--by", "x"]) == 2
    assert main(["events", small, "--ack", "999", "--by", "x"]) == 2
    code, d = run_json(capsys, ["events", small, "--since", "2030-01-01"])
    assert code == 0 and d["events"] == []


# -- trend, waterfall, compare ----------------------------------------------------------
def test_trend_json_csv_and_exit_status(small, tmp_path, capsys):
    csv_path = tmp_path / "trend.csv"
    code, d = run_json(capsys, ["trend", small, "--point", H, "--value",
                                "overall_velocity_mm_s", "--csv", str(csv_path)])
    assert code == 0
    assert set(d) == {"time", "value", "unit", "alert", "danger", "forecast"}
    assert d["unit"] == "mm/s RMS" and (d["alert"], d["danger"]) == (2.8, 4.5)
    assert d["value"] == pytest.approx([1.2 * a for a in ONE_X])
    assert d["forecast"]["status"] in ("flat", "falling", "forecast")
    back = read_trend_csv(csv_path)
    assert back.point == H and back.values.tolist() == pytest.approx(d["value"])
    code, d = run_json(capsys, ["trend", small, "--point", H, "--value", "rpm",
                                "--no-forecast", "--until", "2026-01-12"])
    assert code == 0 and d["forecast"] is None and len(d["time"]) == 2   # until day's end
    assert main(["trend", small, "--point", H, "--value", "speed"]) == 2
    assert "not known" in capsys.readouterr().err
    f = tmp_path / "low.json"
    write_plan_file(low_plan(), f)
    main(["plan", small, H, "--file", str(f)])
    capsys.readouterr()
    assert main(["trend", small, "--point", H, "--value", "overall_velocity_mm_s"]) == 1
    assert "forecast" in capsys.readouterr().out


def test_waterfall_and_compare_commands(small, capsys):
    code, d = run_json(capsys, ["waterfall", small, "--point", H, "--orders"])
    assert code == 0 and d["axis_unit"] == "order" and len(d["matrix"]) == 6
    one = d["axis"].index(1.0)
    assert all(int(np.nanargmax(np.array(r, dtype=float))) == one for r in d["matrix"])
    assert main(["waterfall", small, "--point", H]) == 0
    assert "largest line" in capsys.readouterr().out
    with open_archive(small) as arc:
        rid = arc.value_rows(H)["run_id"][1]
    code, d = run_json(capsys, ["compare", small, "--run", rid, "--reference", rid])
    assert code == 0 and set(d["db"]) == {0.0}
    code, d = run_json(capsys, ["compare", small, "--run", rid])
    assert code == 0 and d["reference_runs"][0] != rid and len(d["reference_runs"]) == 5
    # Week 2's 1× is 1.1 mm/s against the power mean √(Σa²/5) of weeks 1–5 (first
    # principles of power averaging); the tone line's dB is 20·log10 of that ratio.
    ref = math.sqrt(np.mean(np.square(ONE_X[:5])))
    i = int(np.argmax(d["current"]))
    assert d["frequency_hz"][i] == pytest.approx(RPM / 60, abs=1.25)
    assert d["db"][i] == pytest.approx(20 * math.log10(1.1 / ref), abs=0.05)
    assert main(["compare", small, "--run", "nonexistent"]) == 2
