"""Importing files and folders: plan, mapping by pattern, bad files, dry run, cancel."""

from __future__ import annotations

import io
import threading

import numpy as np
import pytest
from _archive_helpers import POINT, new_archive, recording

from engine.archive import open_archive
from engine.errors import InputError
from engine.importer import (
    ReadOptions,
    TerminalProgress,
    plan_import,
    remembered_pattern,
    run_import,
)
from engine.io import read_recording, write_csv, write_wav
from engine.recording import Channel, Recording

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
PUMP = "Works/P-101/pump DE H"


def _survey(folder, weeks=(1, 2, 3)):
    """A survey folder: WAV files for two points, a CSV in a sub-folder."""
    folder.mkdir(parents=True, exist_ok=True)
    files = []
    for w in weeks:
        files.append(write_wav(folder / f"P-101_motorDEH_2026-08-0{w}.wav", recording(w)))
        files.append(write_wav(folder / f"P-101_pumpDEH_2026-08-0{w}.wav", recording(100 + w)))
    (folder / "more").mkdir(exist_ok=True)
    files.append(write_csv(folder / "more" / "P-101_pumpDEH_extra.csv", recording(200)))
    return files


def _listing(folder):
    return {p.relative_to(folder): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in folder.rglob("*")}


def test_folder_import_maps_by_pattern_and_skips_a_bad_file(tmp_path):
    survey = tmp_path / "survey"
    _survey(survey)
    (survey / "P-101_motorDEH_broken.wav").write_bytes(b"RIFF\x10\x00\x00\x00WAVEjunk")
    (survey / "notes.pdf").write_bytes(b"not a recording")  # not a recording suffix
    with new_archive(tmp_path / "a", points=2) as arc:
        arc.update_point(POINT, mapping_patterns=["P-101_motorDEH_*.wav"])
        arc.update_point(PUMP, mapping_patterns=["p-101_pumpdeh_*"])  # ignoring case
        stored_before = arc.import_recording(recording(300), POINT).run_id
        plan = plan_import(arc, [survey])
        assert len(plan.items) == 8 and len(plan.mapped()) == 8
        summary = run_import(plan)
    assert len(summary.imported) == 7 and summary.duplicates == []
    assert [s["file"] for s in summary.skipped] == [str(survey / "P-101_motorDEH_broken.wav")]
    assert "P-101_motorDEH_broken.wav" in summary.skipped[0]["reason"]
    with open_archive(tmp_path / "a") as arc:
        assert len(arc.runs(POINT)) == 4 and len(arc.runs(PUMP)) == 4
        assert stored_before in {r.run_id for r in arc.runs(POINT)}
        assert arc.check() == []
        row = [r for r in arc.runs(PUMP) if r.run_id == summary.imported[-1]["run_id"]][0]
        rec, info = arc.read_run(row.run_id)
        assert info.source == "P-101_pumpDEH_extra.csv" and info.taken_source == "file time"
        assert np.array_equal(rec.channels[0].samples, recording(200).channels[0].samples)


def test_a_second_import_of_the_survey_adds_nothing(tmp_path):
    survey = tmp_path / "survey"
    _survey(survey)
    with new_archive(tmp_path / "a") as arc:
        first = run_import(plan_import(arc, [survey], point=POINT))
    before = _listing(tmp_path / "a" / "runs")
    with open_archive(tmp_path / "a", mode="w") as arc:
        again = run_import(plan_import(arc, [survey], point=POINT))
    assert again.imported == [] and len(again.duplicates) == len(first.imported) == 7
    assert {d["run_id"] for d in again.duplicates} == {i["run_id"] for i in first.imported}
    assert _listing(tmp_path / "a" / "runs") == before


def test_unmapped_and_ambiguous_files_are_reported(tmp_path):
    survey = tmp_path / "survey"
    _survey(survey, weeks=(1,))
    with new_archive(tmp_path / "a", points=2) as arc:
        arc.update_point(POINT, mapping_patterns=["P-101_*.wav"])
        arc.update_point(PUMP, mapping_patterns=["*pumpDEH*.wav"])
        plan = plan_import(arc, [survey, tmp_path / "nowhere"])
        reasons = {i.file.name: i.reason for i in plan.items if i.point is None}
    assert "several points" in reasons["P-101_pumpDEH_2026-08-01.wav"]
    assert "no point's pattern" in reasons["P-101_pumpDEH_extra.csv"]
    assert "no such file or folder" in reasons["nowhere"]
    assert [i.point for i in plan.items if i.file.name.startswith("P-101_motor")] == [POINT]


def test_dry_run_writes_nothing(tmp_path):
    survey = tmp_path / "survey"
    _survey(survey)
    new_archive(tmp_path / "a").close()
    before = _listing(tmp_path / "a")
    with open_archive(tmp_path / "a") as reader:  # a plan needs no writer
        plan = plan_import(reader, [survey], point=POINT)
        assert len(plan.mapped()) == 7
        assert plan.as_dict()["to_import"] == 7
    assert _listing(tmp_path / "a") == before


def test_cancel_stops_after_the_current_file_and_keeps_what_is_stored(tmp_path):
    survey = tmp_path / "survey"
    _survey(survey)
    stop = threading.Event()
    seen = []

    def progress(done, total, file):
        seen.append((done, total))
        if done == 2:
            stop.set()

    with new_archive(tmp_path / "a") as arc:
        summary = run_import(plan_import(arc, [survey], point=POINT), progress=progress,
                             cancel=stop)
    assert summary.cancelled and len(summary.imported) == 2 and seen == [(1, 7), (2, 7)]
    with open_archive(tmp_path / "a") as arc:
        assert {r.run_id for r in arc.runs()} == {i["run_id"] for i in summary.imported}
        assert arc.check() == []


def test_remember_stores_a_pattern_that_maps_the_next_survey(tmp_path):
    # The digits of the tag stay, the date becomes '*' (common practice for survey names).
    assert remembered_pattern("P-101_DE_H_2026-08-03_0815.wav", "P-101") == \
        "P-101_DE_H_*-*-*_*.wav"
    assert remembered_pattern("pump[1]_7.csv", "X") == "pump[[]*]_*.csv"
    week1, week2 = tmp_path / "w1", tmp_path / "w2"
    week1.mkdir()
    week2.mkdir()
    write_wav(week1 / "P-101_motorDEH_2026-08-03.wav", recording(1))
    write_wav(week2 / "P-101_motorDEH_2026-08-10.wav", recording(2))
    write_wav(week2 / "P-102_motorDEH_2026-08-10.wav", recording(3))
    with new_archive(tmp_path / "a") as arc:
        s1 = run_import(plan_import(arc, [week1], point=POINT, remember=True))
        assert s1.remembered == {POINT: ["P-101_motorDEH_*-*-*.wav"]}
        assert arc.point(POINT).mapping_patterns == ["P-101_motorDEH_*-*-*.wav"]
        plan = plan_import(arc, [week2])
        mapped = {i.file.name: i.point for i in plan.items}
    assert mapped == {"P-101_motorDEH_2026-08-10.wav": POINT,
                      "P-102_motorDEH_2026-08-10.wav": None}
    with pytest.raises(InputError, match="needs --point"):
        with open_archive(tmp_path / "a") as arc:
            plan_import(arc, [week2], remember=True)


def test_point_sensitivity_reads_volts(tmp_path):
    # 100 mV/g: a file of volts 0.1 × x reads back as x g (parse_sensitivity, mV/g).
    x = recording(7).channels[0].samples
    write_wav(tmp_path / "v.wav", Recording(5120.0, [Channel(0.1 * x, "V")]), bits=64)
    with new_archive(tmp_path / "a") as arc:
        arc.update_point(POINT, sensitivity="100mV/g")
        summary = run_import(plan_import(arc, [tmp_path / "v.wav"], point=POINT))
        rec, _ = arc.read_run(summary.imported[0]["run_id"])
    assert rec.channels[0].unit == "g"
    assert rec.channels[0].sensitivity_v_per_unit == pytest.approx(0.1)
    np.testing.assert_allclose(rec.channels[0].samples, x, rtol=1e-12)


def test_large_wav_is_streamed_with_the_same_run_id(tmp_path):
    wav = write_wav(tmp_path / "big.wav", recording(8, n=40_000, channels=2), bits=32)
    ids = []
    for name, threshold in (("memory", 1 << 40), ("stream", 0)):
        with new_archive(tmp_path / name) as arc:
            s = run_import(plan_import(arc, [wav], point=POINT, taken="2026-08-03T08:00:00"),
                           stream_threshold_bytes=threshold)
            ids.append(s.imported[0]["run_id"])
            assert arc.check() == []
    assert ids[0] == ids[1]
    direct = read_recording(wav)
    with open_archive(tmp_path / "stream") as arc:
        rec, info = arc.read_run(ids[1])
    assert np.array_equal(rec.channels[1].samples, direct.channels[1].samples)
    assert info.taken_source == "given" and info.taken.isoformat().startswith("2026-08-03T08")


def test_read_options_and_bad_options_are_reported_per_file(tmp_path):
    write_csv(tmp_path / "no_time.csv", recording(9), with_time=False)
    with new_archive(tmp_path / "a") as arc:
        s = run_import(plan_import(arc, [tmp_path / "no_time.csv"], point=POINT))
        assert s.imported == [] and "sample rate" in s.skipped[0]["reason"]
        s = run_import(plan_import(arc, [tmp_path / "no_time.csv"], point=POINT,
                                   options=ReadOptions(sample_rate_hz=5120.0)))
        assert len(s.imported) == 1


def test_terminal_progress_shows_count_rate_and_time_left():
    out = io.StringIO()
    bar = TerminalProgress(out, width=10)
    bar(3, 10, "/survey/P-101_motorDEH.wav")
    bar.finish()
    line = out.getvalue()
    assert "[###-------] 3/10" in line and "files/s" in line and "left" in line
    assert "P-101_motorDEH.wav" in line and line.endswith("\n")
