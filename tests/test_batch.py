"""The batch engine: pool, cluster and serial analysis agree; cancel and resume; plan
changes re-evaluate the history; failures are reported; the command line's status."""

from __future__ import annotations

import json
import logging
import math
import shutil
import signal
import threading

import numpy as np
import pytest
import scipy.stats

from engine import batch, pipeline
from engine.alarms.plan import AlarmPlan, Band
from engine.archive import create_archive, open_archive
from engine.batch import apply_plan, check_settings, reprocess
from engine.batch_journal import JOURNAL_FILE
from engine.batch_view import ArchiveView
from engine.batch_input import BatchSummary
from engine.cli import main
from engine.commands.batch_cmds import exit_status, stop_on_interrupt
from engine.demo_plant import PLANT, demo_recording
from engine.errors import ArchiveError, InputError
from engine.kinematics import model_from_demo

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")

SITE = PLANT.site
#: B-301 has an axial point (its 1×/2× feed the radial points' misalignment finding)
#: and its motor change in week 10 makes the later runs differ from the earlier ones.
MACHINE = "B-301"
WEEKS = (8, 9, 10, 11)
AXIAL = f"{SITE}/{MACHINE}/blower DE A"
RADIAL = f"{SITE}/{MACHINE}/blower DE H"
#: The pooled batch is stopped once this many runs are back.
STOP_AFTER = 5


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    """12 runs of 1 s (3 points × 4 weeks), imported but not analysed."""
    path = tmp_path_factory.mktemp("batch") / "base.shaftwatch"
    m = PLANT.machine(MACHINE)
    with create_archive(path, plant_name="Batch Works") as arc:
        arc.add_site(SITE)
        arc.add_machine(SITE, m.tag, nominal_rpm=m.nominal_rpm, iso_group=m.iso_group,
                        foundation=m.foundation, ratios=dict(m.shafts))
        for p in m.points:
            # 400 lines at 1 kHz: a 0.4 s frame, so that a 1 s run holds averages.
            arc.add_point(SITE, m.tag, p.name, location=p.location, shaft=p.shaft,
                          direction=p.direction, unit="g", fmax_hz=1000.0, lines=400)
        arc.set_machine_model(SITE, m.tag, model_from_demo(m))
        for week in WEEKS:
            for p in m.points:
                rec = demo_recording(m.tag, p.name, week, duration_s=1.0)
                arc.import_recording(rec, f"{SITE}/{m.tag}/{p.name}", taken=rec.taken,
                                     rpm=rec.rpm)
    return path


def _copy(src, tmp_path, name):
    dst = tmp_path / name
    shutil.copytree(src, dst)
    return dst


@pytest.fixture(scope="module")
def serial(base, tmp_path_factory):
    """The base archive analysed and evaluated serially by engine.pipeline."""
    path = tmp_path_factory.mktemp("serial") / "serial.shaftwatch"
    shutil.copytree(base, path)
    with open_archive(path, mode="w") as arc:
        done, problems = pipeline.analyse_runs(arc, [r.run_id for r in arc.runs()])
        assert len(done) == 12 and problems == []
        pipeline.evaluate_points(arc)
    return path


@pytest.fixture(scope="module")
def pooled(base, tmp_path_factory):
    """The base archive reprocessed by a local pool of two processes, stopped once
    five runs are back, then continued by the same command (in this process).

    Returns the path, the two summaries and the results files' modification times
    (ns) of the runs done before the stop, taken just after it.
    """
    path = tmp_path_factory.mktemp("pooled") / "pooled.shaftwatch"
    shutil.copytree(base, path)
    seen = []
    stopped = reprocess(path, workers=2, progress=lambda d, t, text: seen.append(d),
                        cancel=lambda: bool(seen) and seen[-1] >= STOP_AFTER)
    journal = json.loads((path / JOURNAL_FILE).read_text(encoding="utf-8"))
    with open_archive(path) as arc:
        kept = {rid: arc.results_file(rid).stat().st_mtime_ns for rid in stopped.done}
        states = {rid: arc.results(rid).state for rid in stopped.done}
    resumed = reprocess(path, workers=1, cancel=threading.Event())
    return path, stopped, resumed, journal, kept, states


def _same_results(a, b, *, tol=1e-9):
    """Every run of archive ``a`` has the same results, state and events in ``b``."""
    with open_archive(a) as x, open_archive(b) as y:
        ids = [r.run_id for r in x.runs()]
        assert ids == [r.run_id for r in y.runs()]
        for rid in ids:
            ra, rb = x.results(rid), y.results(rid)
            assert ra is not None and rb is not None, rid
            assert ra.values.keys() == rb.values.keys()
            for k, v in ra.values.items():
                w = rb.values[k]
                assert (math.isnan(v) and math.isnan(w)) or abs(v - w) <= tol * max(1, abs(v)), \
                    (rid, k, v, w)
            assert ra.findings == rb.findings, rid
            assert ra.labelled_peaks == rb.labelled_peaks, rid
            assert ra.envelope_peaks == rb.envelope_peaks, rid
            assert (ra.state, ra.zone, ra.plan_digest) == (rb.state, rb.zone, rb.plan_digest)
            np.testing.assert_array_equal(ra.spectrum.amplitude, rb.spectrum.amplitude)
            assert ra.settings["spectrum"] == rb.settings["spectrum"]
        assert [(e.point, e.run_id, e.band, e.state) for e in x.events()] == \
            [(e.point, e.run_id, e.band, e.state) for e in y.events()]
        return ids


def test_pool_gives_the_serial_results_run_for_run(serial, pooled):
    path, stopped, summary = pooled[:3]
    assert stopped.where.startswith("process pool") and stopped.workers == 2
    assert len(summary.done) + len(stopped.done) == 12 and summary.failed == []
    assert not summary.cancelled and set(summary.states.values()) <= {"ok", "alert", "danger"}
    # First principles: the analysis is deterministic, so where it runs must not
    # change a value, a finding or a state.
    ids = _same_results(serial, path)
    assert not (path / JOURNAL_FILE).exists()          # a finished batch leaves none
    # The axial companion reached the radial runs: findings that need it are the same
    # as the serial ones above; here check that the radial point has findings at all.
    with open_archive(path) as arc:
        assert any(arc.results(r.run_id).findings for r in arc.runs(RADIAL))
        r = arc.results(ids[0])
        rec, _ = arc.read_run(ids[0])
    # Reference implementation: Pearson kurtosis is scipy.stats.kurtosis(fisher=False).
    x = rec.channels[0].samples
    assert r.values["kurtosis"] == pytest.approx(scipy.stats.kurtosis(x, fisher=False),
                                                 rel=1e-9)


def test_a_second_batch_leaves_current_results_alone(pooled, tmp_path):
    path = _copy(pooled[0], tmp_path, "again.shaftwatch")
    mtimes = {p: p.stat().st_mtime_ns for p in (path / "results").rglob("*.h5")}
    summary = reprocess(path, workers=1)
    assert summary.done == [] and len(summary.skipped) == 12
    assert {p: p.stat().st_mtime_ns for p in mtimes} == mtimes
    # Other settings make the runs out of date: analysed again with them.
    summary = reprocess(path, workers=1, points=[AXIAL], settings={"lines": 200})
    assert len(summary.done) == 4
    with open_archive(path) as arc:
        assert {arc.results(r.run_id).spectrum.lines for r in arc.runs(AXIAL)} == {200}
    again = reprocess(path, workers=1, points=[AXIAL], settings={"lines": 200})
    assert again.done == [] and len(again.skipped) == 4


def test_cancel_then_resume_finishes_without_redoing(pooled):
    path, stopped, resumed, journal, kept, states = pooled
    assert stopped.cancelled and stopped.left > 0 and stopped.failed == []
    first = set(stopped.done)
    # The runs in flight when the cancel came (at most two per worker) were finished
    # and kept, and are listed in the journal.
    assert STOP_AFTER <= len(first) <= STOP_AFTER + 4
    assert set(journal["done"]) == first
    # Every run kept got its state: the points were evaluated on the way out.
    assert all(states.values())
    assert set(resumed.skipped) == first and len(resumed.done) == 12 - len(first)
    assert not set(resumed.done) & first and not resumed.cancelled
    assert any("continuing a stopped batch" in n for n in resumed.notes)
    with open_archive(path) as arc:
        assert {rid: arc.results_file(rid).stat().st_mtime_ns for rid in first} == kept


def test_cancel_in_this_process_stops_at_once(base, tmp_path):
    path = _copy(base, tmp_path, "inline-stop.shaftwatch")
    seen = []
    summary = reprocess(path, workers=1, progress=lambda d, t, text: seen.append(d),
                        cancel=lambda: bool(seen) and seen[-1] >= 3)
    assert summary.cancelled and len(summary.done) == 3 and summary.left == 9
    journal = json.loads((path / JOURNAL_FILE).read_text(encoding="utf-8"))
    assert journal["done"] == summary.done


def test_a_journal_of_other_parameters_is_replaced(base, tmp_path):
    path = _copy(base, tmp_path, "other.shaftwatch")
    seen = []
    reprocess(path, workers=1, points=[AXIAL], progress=lambda d, t, x: seen.append(d),
              cancel=lambda: bool(seen) and seen[-1] >= 2)
    old = json.loads((path / JOURNAL_FILE).read_text(encoding="utf-8"))
    assert len(old["done"]) == 2
    summary = reprocess(path, workers=1, points=[AXIAL], settings={"lines": 200})
    assert any("other parameters" in n for n in summary.notes)
    assert len(summary.done) == 4 and summary.skipped == []
    assert not (path / JOURNAL_FILE).exists()
    (path / JOURNAL_FILE).write_text("{half a journal", encoding="utf-8")
    summary = reprocess(path, workers=1, points=[AXIAL], settings={"lines": 200})
    assert any("not a readable batch journal" in n for n in summary.notes)
    assert summary.done == [] and len(summary.skipped) == 4


def test_dask_cluster_gives_the_pool_results(pooled, base, tmp_path):
    distributed = pytest.importorskip(
        "distributed", reason="dask.distributed is not installed (the 'cluster' extra)")
    path = _copy(base, tmp_path, "dask.shaftwatch")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None,
                                  silence_logs=logging.ERROR) as cluster:
        summary = reprocess(path, scheduler=cluster.scheduler_address)
    assert summary.where.startswith("Dask cluster") and summary.workers == 2
    assert len(summary.done) == 12 and summary.failed == []
    _same_results(pooled[0], path)


def _alert_everywhere_plan(arc, point) -> AlarmPlan:
    """An overall-velocity plan whose alert level is below every run's value."""
    _, v = arc.values(point, "overall_velocity_mm_s")
    return AlarmPlan(name="tight", origin="test", bands=(
        Band(name="overall tight", measure="overall", alert=0.5 * float(v.min()),
             danger=10.0 * float(v.max())),
        Band(name="2x", measure="band_rms", alert=5.0, danger=10.0, low=1.9, high=2.1,
             basis="order")))


@pytest.mark.parametrize("pool", [False, True], ids=["parent", "pool"])
def test_apply_plan_equals_evaluating_from_scratch(serial, tmp_path, monkeypatch, pool):
    path = _copy(serial, tmp_path, "plan.shaftwatch")
    fresh = _copy(serial, tmp_path, "fresh.shaftwatch")
    with open_archive(path) as arc:
        plan = _alert_everywhere_plan(arc, RADIAL)
        before = arc.point_states()[RADIAL]["state"]
    if pool:
        monkeypatch.setattr(batch, "POOL_MIN_REMEASURE", 1)
    summary = apply_plan(path, [RADIAL], plan, workers=2 if pool else 1)
    assert summary.where.startswith("process pool" if pool else "this process")
    assert summary.remeasured == 4 and summary.failed == []
    assert summary.states == {RADIAL: "alert"}
    assert summary.changed == {RADIAL: (before, "alert")} and before == "ok"
    with open_archive(fresh, mode="w") as arc:
        arc.set_plan(RADIAL, plan)
        pipeline.evaluate_points(arc)
    _same_results(fresh, path)


def test_apply_plan_refuses_a_bad_plan_and_changes_nothing(serial, tmp_path):
    path = _copy(serial, tmp_path, "bad-plan.shaftwatch")
    too_high = AlarmPlan(name="beyond fmax", origin="test", bands=(
        Band(name="high", measure="band_rms", alert=1.0, danger=2.0, low=1500.0,
             high=1800.0),))
    listing = {p: p.stat().st_mtime_ns for p in path.rglob("*") if p.is_file()}
    with pytest.raises(InputError, match="high"):
        apply_plan(path, [RADIAL], too_high, workers=1)
    assert {p: p.stat().st_mtime_ns for p in path.rglob("*") if p.is_file()} == listing


def test_an_unreadable_run_file_is_reported_and_nothing_else_changes(serial, tmp_path):
    path = _copy(serial, tmp_path, "broken.shaftwatch")
    with open_archive(path) as arc:
        victim = arc.runs(RADIAL)[1]
        run_file = path / victim.path
        results_file = arc.results_file(victim.run_id)
        row_before = {k: v for k, v in _row(arc, victim.run_id).items()}
    run_file.write_bytes(run_file.read_bytes()[:200])        # cut short: not HDF5 now
    results_bytes = results_file.read_bytes()
    summary = reprocess(path, workers=1, points=[RADIAL], resume=False)
    assert [f["run_id"] for f in summary.failed] == [victim.run_id]
    assert summary.failed[0]["path"] == str(run_file)
    assert str(run_file) in summary.failed[0]["reason"]
    assert len(summary.done) == 3 and not summary.cancelled
    assert results_file.read_bytes() == results_bytes
    with open_archive(path) as arc:
        row = _row(arc, victim.run_id)
    for k, v in row_before.items():
        assert (v == row[k]) or (isinstance(v, float) and math.isnan(v) and math.isnan(row[k]))
    _same_results(serial, path)


def test_a_damaged_results_file_stops_only_its_point_evaluation(serial, tmp_path):
    path = _copy(serial, tmp_path, "damaged.shaftwatch")
    with open_archive(path, mode="w") as arc:
        plan = _alert_everywhere_plan(arc, RADIAL)
        arc.set_plan(RADIAL, plan)
        victim = arc.runs(RADIAL)[2].run_id
        damaged = arc.results_file(victim)
        before = {r.run_id: _row(arc, r.run_id) for r in arc.runs()}
    damaged.write_bytes(b"not HDF5 any more")
    summary = reprocess(path, what="evaluate", workers=1)
    assert [(f["run_id"], f["path"]) for f in summary.failed] == [(victim, str(damaged))]
    assert any(n.startswith(RADIAL) and "not evaluated" in n for n in summary.notes)
    assert RADIAL not in summary.changed and summary.remeasured == 0
    with open_archive(path) as arc:
        after = {r.run_id: _row(arc, r.run_id) for r in arc.runs()}
    # The point's rows keep their values, plan digest and states (its other runs were
    # re-measured in their files, but the value table takes a point whole or not at
    # all); the other points are evaluated as before.
    for rid, row in before.items():
        for k in ("state", "zone", "plan_digest", "overall_velocity_mm_s"):
            assert after[rid][k] == row[k], (rid, k)


def _row(arc, run_id):
    point = arc._catalogue.get(run_id).point
    rows = arc.value_rows(point)
    i = list(rows["run_id"]).index(run_id)
    return {k: (v[i].item() if hasattr(v[i], "item") else v[i]) for k, v in rows.items()}


def test_a_setting_the_runs_cannot_hold_fails_each_run_with_its_reason(base, tmp_path):
    path = _copy(base, tmp_path, "long.shaftwatch")
    # 3200 lines at 1 kHz need a 3.2 s frame (2.56 samples per Hz of Fmax, common
    # practice); the runs last 1 s.
    summary = reprocess(path, workers=1, points=[AXIAL], settings={"lines": 3200})
    assert len(summary.failed) == 4 and summary.done == []
    assert all(AXIAL in f["reason"] for f in summary.failed)


def test_archive_view_answers_as_the_archive(serial):
    with open_archive(serial) as arc:
        view = ArchiveView(arc)
        assert view.point_states() == arc.point_states()
        for p in arc.points():
            a, b = arc.value_rows(p.path), view.value_rows(p.path)
            assert a.keys() == b.keys()
            for k in a:
                np.testing.assert_array_equal(a[k], b[k])
        assert view.plan(RADIAL) == arc.plan(RADIAL)


def test_bad_input_is_refused_before_anything_changes(base, tmp_path):
    path = _copy(base, tmp_path, "input.shaftwatch")
    with pytest.raises(InputError, match="what"):
        reprocess(path, what="everything")
    with pytest.raises(InputError, match="lines"):
        reprocess(path, settings={"lines": 7})
    with pytest.raises(InputError, match="colour"):
        check_settings({"colour": "red"})
    with pytest.raises(InputError, match="evaluate"):
        reprocess(path, what="evaluate", settings={"lines": 800})
    with pytest.raises(InputError, match="workers"):
        reprocess(path, workers=0)
    with pytest.raises(InputError, match="nowhere"):
        reprocess(path, points=["Demo Works/B-301/nowhere"])
    with pytest.raises(ArchiveError):
        reprocess(tmp_path / "missing.shaftwatch")
    with open_archive(path) as arc:
        assert arc.analysed_runs() == set()


def test_first_ctrl_c_asks_to_stop_and_the_second_interrupts():
    event = threading.Event()
    before = signal.getsignal(signal.SIGINT)
    with stop_on_interrupt(event):
        signal.raise_signal(signal.SIGINT)
        assert event.is_set()
        with pytest.raises(KeyboardInterrupt):
            signal.raise_signal(signal.SIGINT)
    assert signal.getsignal(signal.SIGINT) is before
    assert exit_status(BatchSummary(what="analyse", cancelled=True)) == 130
    assert exit_status(BatchSummary(what="analyse", states={"a": "ok", "b": "danger"})) == 1
    assert exit_status(BatchSummary(what="analyse", states={"a": "ok", "b": "no data"})) == 0


def test_command_line_exit_status(serial, tmp_path, capsys):
    path = _copy(serial, tmp_path, "cli.shaftwatch")
    assert main(["reprocess", str(path), "--what", "evaluate", "--workers", "1",
                 "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out["states"].values()) == {"ok"} and out["done"] == 0
    with open_archive(path) as arc:
        plan = _alert_everywhere_plan(arc, RADIAL)
        before = {r.run_id: _row(arc, r.run_id)["state"] for r in arc.runs()}
    with open_archive(path, mode="w") as arc:
        arc.set_plan(RADIAL, plan)
    assert main(["reprocess", str(path), "--what", "evaluate", "--point", RADIAL,
                 "--workers", "1"]) == 1
    text = capsys.readouterr().out
    assert "re-measured 4" in text and "alert" in text
    assert main(["reprocess", str(path), "--point", AXIAL, "--lines", "200",
                 "--workers", "1", "--json", "--progress"]) == 0
    captured = capsys.readouterr()
    out = json.loads(captured.out)
    assert out["done"] == 4 and out["states"] == {AXIAL: "ok"}
    assert "5/5" in captured.err             # 4 runs, then the point evaluated
    assert main(["reprocess", str(path), "--point", "Demo Works/B-301/nowhere"]) == 2
    assert "nowhere" in capsys.readouterr().err
    assert main(["reprocess", str(path), "--lines", "7"]) == 2
    assert main(["reprocess", str(tmp_path / "missing")]) == 2
    with pytest.raises(SystemExit) as exc:
        main(["reprocess", str(path), "--what", "everything"])
    assert exc.value.code == 2
    with open_archive(path) as arc:
        after = {r.run_id: _row(arc, r.run_id)["state"] for r in arc.runs(AXIAL)}
    assert after == {r: s for r, s in before.items() if r in after}
