"""The plant archive: run files, catalogue, asset tree, versions, integrity."""

from __future__ import annotations

import hashlib
import json
import math
import shutil
import warnings

import h5py
import numpy as np
import pytest
from _archive_helpers import FS_HZ, POINT, new_archive, recording, taken

from engine.archive import SCHEMA_VERSION, open_archive
from engine.errors import ArchiveError, EngineWarning, InputError
from engine.io import read_recording, write_wav
from engine.levels import overall_levels
from engine.recording import Channel, Recording
from engine.units import STANDARD_GRAVITY

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")


@pytest.mark.filterwarnings("ignore:overflow:RuntimeWarning",
                            "ignore:invalid value:RuntimeWarning")
def test_run_read_back_with_plain_h5py_equals_samples(tmp_path, rng):
    # Reference: h5py alone (no Shaftwatch code) reads the run file.  Values chosen to
    # catch any lossy step: tiny, huge, negative zero and random doubles.
    x0 = rng.standard_normal(300_000)
    x0[:4] = [1e-300, -0.0, 1.7976931348623157e308, -5e-324]
    x1 = rng.uniform(-3, 3, 300_000)
    rec = Recording(25600.0, [Channel(x0, "g", name="acc", direction="V"),
                              Channel(x1, "mm/s", name="vel")], source="raw.wav")
    with new_archive(tmp_path / "a.shaftwatch") as arc:
        result = arc.import_recording(rec, POINT, taken=taken(1))
    files = list((tmp_path / "a.shaftwatch" / "runs").glob("*/*.h5"))
    assert [f.stem for f in files] == [result.run_id]
    with h5py.File(files[0], "r") as f:
        s0, s1 = f["channels/0/samples"], f["channels/1/samples"]
        assert s0.dtype == np.float64
        assert s0.compression == "gzip" and s0.shuffle and s0.chunks is not None
        assert np.array_equal(s0[()].view(np.uint64), x0.view(np.uint64))  # bit for bit
        assert np.array_equal(s1[()], x1)
        assert s0.attrs["unit"] == "g" and s1.attrs["unit"] == "mm/s"
        assert s0.attrs["direction"] == "V" and s0.attrs["name"] == "acc"
        assert s0.attrs["sample_rate_hz"] == 25600.0 == f.attrs["sample_rate_hz"]
        assert f.attrs["point"] == POINT and f.attrs["run_id"] == result.run_id
        # FIPS 180-4 SHA-256 by hashlib over the little-endian float64 bytes.
        assert s0.attrs["sha256"] == hashlib.sha256(x0.astype("<f8").tobytes()).hexdigest()


def test_run_id_covers_rate_channel_count_and_samples(tmp_path):
    rec = recording(1, channels=2)
    with new_archive(tmp_path / "a") as arc:
        rid = arc.import_recording(rec, POINT).run_id
        # The documented construction (docs/archive-schema.md), rebuilt with hashlib.
        digests = [hashlib.sha256(c.samples.astype("<f8").tobytes()).hexdigest()
                   for c in rec.channels]
        text = f"{FS_HZ!r}\n2\n" + "\n".join(digests)
        assert rid == hashlib.sha256(text.encode()).hexdigest()[:20]
        other_rate = Recording(FS_HZ * 2, rec.channels, source="x")
        assert arc.import_recording(other_rate, POINT).run_id != rid


def test_duplicate_import_stored_once(tmp_path):
    rec = recording(2)
    with new_archive(tmp_path / "a") as arc:
        first = arc.import_recording(rec, POINT)
        again = arc.import_recording(recording(2), POINT, notes="second try")
        assert first.duplicate_of is None and again.duplicate_of == first.run_id
    with open_archive(tmp_path / "a", mode="w") as arc:
        third = arc.import_recording(recording(2), POINT)
        assert third.duplicate and third.run_id == first.run_id
        assert len(arc.runs()) == 1
    assert len(list((tmp_path / "a" / "runs").glob("*/*.h5"))) == 1


def test_summary_is_overall_levels_of_first_non_tach_channel(tmp_path):
    # 1 g peak at 100 Hz is g_n/(2π·100 Hz) = 15.61 mm/s peak (CGPM g_n = 9.80665 m/s²),
    # 11.04 mm/s RMS; the tach channel (index 0 here) is not summarised.
    n = 51200
    t = np.arange(n) / 25600.0
    vib = np.sin(2 * np.pi * 100.0 * t)
    tach = np.where((t * 25.0) % 1.0 < 0.1, 5.0, 0.0)
    rec = Recording(25600.0, [Channel(tach, "V", name="tach"), Channel(vib, "g")],
                    source="x", tach_channel=0, rpm=1500.0)
    with new_archive(tmp_path / "a") as arc:
        rid = arc.import_recording(rec, POINT).run_id
        row = arc.runs()[0]
        info = arc.run_info(rid)
    expected = STANDARD_GRAVITY / (2 * math.pi * 100.0) / math.sqrt(2) * 1e3
    assert row.velocity_rms_mm_s == pytest.approx(expected, rel=1e-6)
    lv = overall_levels(vib, 25600.0, unit_in="g", rpm=1500.0)
    assert row.acceleration_rms_g == lv.acceleration_rms_g
    assert row.kurtosis == lv.kurtosis and row.rpm == 1500.0
    assert info.summary["channel"] == 1 and info.tach_channel == 0
    assert (row.velocity_band_low_hz, row.velocity_band_high_hz) == (10.0, 1000.0)


def test_summary_note_when_levels_cannot_be_computed(tmp_path):
    # A channel in volts has no vibration level; the run is kept, the values are NaN.
    rec = Recording(FS_HZ, [Channel(recording(3).channels[0].samples, "V")], source="v")
    with new_archive(tmp_path / "a") as arc:
        rid = arc.import_recording(rec, POINT).run_id
        info = arc.run_info(rid)
        assert math.isnan(arc.runs()[0].velocity_rms_mm_s)
    assert "volts" in info.summary["note"]


def _flip_samples(path):
    with h5py.File(path, "r") as f:
        chunk = f["channels/0/samples"].id.get_chunk_info(0)
    with open(path, "r+b") as f:
        f.seek(chunk.byte_offset + chunk.size // 2)
        data = bytearray(f.read(16))
        f.seek(chunk.byte_offset + chunk.size // 2)
        f.write(bytes(b ^ 0xFF for b in data))


def test_corrupted_run_detected_by_check(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        bad = arc.import_recording(recording(4), POINT)
        good = arc.import_recording(recording(5), POINT)
        assert arc.check() == []
    _flip_samples(tmp_path / "a" / bad.file)
    with open_archive(tmp_path / "a") as arc:
        problems = arc.check()
    assert [p.path for p in problems] == [bad.file]
    assert "cannot be read" in problems[0].message or "sha256" in problems[0].message
    assert good.file not in {p.path for p in problems}


def test_changed_samples_detected_by_checksum(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        r = arc.import_recording(recording(6), POINT)
    with h5py.File(tmp_path / "a" / r.file, "r+") as f:
        f["channels/0/samples"][10] += 1e-9  # a valid file, one sample changed
    with open_archive(tmp_path / "a") as arc:
        problems = arc.check()
    assert len(problems) == 1 and "do not match their sha256" in problems[0].message


@pytest.mark.parametrize("damage", ["delete", "truncate"])
def test_catalogue_lost_is_rebuilt_without_loss(tmp_path, damage):
    with new_archive(tmp_path / "a", points=2) as arc:
        for i in range(6):
            arc.import_recording(recording(10 + i), POINT if i % 2 else
                                 "Works/P-101/pump DE H", taken=taken(i), rpm=1480.0 + i)
        before = sorted(r.as_dict().items() for r in arc.runs())
    cat = tmp_path / "a" / "catalogue.h5"
    if damage == "delete":
        cat.unlink()
    else:
        cat.write_bytes(cat.read_bytes()[:600])
    with open_archive(tmp_path / "a") as reader:
        assert sorted(r.as_dict().items() for r in reader.runs()) == before
        assert any("catalogue" in n for n in reader.notices)
    with open_archive(tmp_path / "a", mode="w") as writer:  # the writer saves it again
        assert writer.check() == []
        result = writer.rebuild()
        assert result.rows == 6 and result.problems == []
    with open_archive(tmp_path / "a") as reader:
        assert reader.notices == []
        assert sorted(r.as_dict().items() for r in reader.runs()) == before


def test_run_files_missing_from_catalogue_are_merged(tmp_path):
    # A writer that stops between a run's rename and the catalogue's rewrite.
    with new_archive(tmp_path / "a") as arc:
        for i in range(3):
            arc.import_recording(recording(20 + i), POINT, taken=taken(i))
    old = (tmp_path / "a" / "catalogue.h5").read_bytes()
    with open_archive(tmp_path / "a", mode="w") as arc:
        for i in range(3, 5):
            arc.import_recording(recording(20 + i), POINT, taken=taken(i))
    (tmp_path / "a" / "catalogue.h5").write_bytes(old)
    with open_archive(tmp_path / "a") as reader:
        assert len(reader.runs()) == 5 and reader.check() == []
        assert any("2 run(s) missing" in n for n in reader.notices)
    with h5py.File(tmp_path / "a" / "catalogue.h5", "r") as f:
        assert f["run_id"].shape == (3,)  # a reader changes nothing
    open_archive(tmp_path / "a", mode="w").close()
    with h5py.File(tmp_path / "a" / "catalogue.h5", "r") as f:
        assert f["run_id"].shape == (5,)


def test_newer_schema_is_a_clear_error(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        rid = arc.import_recording(recording(30), POINT).run_id
        path = tmp_path / "a" / arc.runs()[0].path
    with h5py.File(path, "r+") as f:
        f.attrs["schema_version"] = np.int64(SCHEMA_VERSION + 1)
    with open_archive(tmp_path / "a") as arc, pytest.raises(ArchiveError, match=(
            rf"written by a newer Shaftwatch \(schema {SCHEMA_VERSION + 1}, this version "
            rf"reads up to {SCHEMA_VERSION}\)")):
        arc.read_run(rid)
    with h5py.File(tmp_path / "a" / "plant.h5", "r+") as f:
        f.attrs["schema_version"] = np.int64(SCHEMA_VERSION + 4)
    for mode in ("r", "w"):
        with pytest.raises(ArchiveError, match="newer Shaftwatch"):
            open_archive(tmp_path / "a", mode=mode)
    assert not (tmp_path / "a" / "writer.lock").exists()  # the lock was given back


def _write_v0_archive(folder):
    """The pre-release layout (schema 0): no created_by, no reserved groups, points
    without key, patterns or analysis settings."""
    folder.mkdir()
    (folder / "runs").mkdir()
    with h5py.File(folder / "plant.h5", "w") as f:
        f.attrs["schema_version"] = np.int64(0)
        f.attrs["plant_name"] = "Old Works"
        m = f.create_group("sites/Works/machines/P-101")
        m.attrs["name"] = "old pump"
        m.attrs["nominal_rpm"] = 1480.0
        m.attrs["vendor_note"] = "kept as it is"
        p = m.create_group("points/motor DE H")
        p.attrs["location"] = "motor DE"
        p.attrs["unit"] = "g"


def test_migration_from_schema_0(tmp_path):
    folder = tmp_path / "old"
    _write_v0_archive(folder)
    with open_archive(folder) as reader:  # readable as it is
        assert reader.schema_version == 0
        p = reader.point(POINT)
        assert p.key == "Works--P-101--motor-DE-H" and p.props["lines"] == 1600
        assert reader.runs() == []
    with h5py.File(folder / "plant.h5", "r") as f:
        assert "created_by" not in f.attrs  # reading did not upgrade
    with pytest.warns(EngineWarning, match="upgraded from schema 0 to 1"):
        writer = open_archive(folder, mode="w")
    with writer:
        assert writer.schema_version == 1
        writer.import_recording(recording(31), POINT)
    with h5py.File(folder / "plant.h5", "r") as f:
        assert f.attrs["schema_version"] == 1 and "created_by" in f.attrs
        assert "library/bearings" in f and "events" in f
        m = f["sites/Works/machines/P-101"]
        assert m.attrs["vendor_note"] == "kept as it is"
        assert "model" in m and m.attrs["iso_group"] == 0
        p = m["points/motor DE H"]
        assert p.attrs["key"] == "Works--P-101--motor-DE-H" and "alarm_plan" in p
        assert list(p.attrs["mapping_patterns"]) == [] and p.attrs["quantity"] == "acceleration"
    with open_archive(folder) as reader:
        assert reader.check() == [] and len(reader.runs()) == 1


def test_unknown_groups_and_attributes_survive_edits(tmp_path):
    new_archive(tmp_path / "a").close()
    with h5py.File(tmp_path / "a" / "plant.h5", "r+") as f:
        g = f["sites/Works/machines/P-101/points/motor DE H/alarm_plan"]
        g.create_dataset("bands_hz", data=np.array([[10.0, 1000.0]]))
        g.attrs["future"] = "from a later version"
        f.attrs["site_code"] = np.int32(7)
    with open_archive(tmp_path / "a", mode="w") as arc:
        arc.update_point(POINT, lines=3200, mapping_patterns=["P-101_*.wav"])
        arc.add_machine("Works", "P-102")
    with h5py.File(tmp_path / "a" / "plant.h5", "r") as f:
        g = f["sites/Works/machines/P-101/points/motor DE H/alarm_plan"]
        assert g["bands_hz"][()].tolist() == [[10.0, 1000.0]]
        assert g.attrs["future"] == "from a later version"
        assert f.attrs["site_code"] == 7 and f.attrs["site_code"].dtype == np.int32
        assert f["sites/Works/machines/P-101/points/motor DE H"].attrs["lines"] == 3200


def test_damaged_plant_falls_back_on_prev(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        arc.add_machine("Works", "P-102")  # the last edit, lost with plant.h5
    (tmp_path / "a" / "plant.h5").write_bytes(b"\0" * 100)
    with pytest.warns(EngineWarning, match=r"plant\.h5\.prev"):
        reader = open_archive(tmp_path / "a")
    with reader:
        assert list(reader.plant.machine("Works", "P-101").points) == ["motor DE H"]
        assert "P-102" not in reader.plant.sites["Works"].machines
        assert [p.path for p in reader.check()] == ["plant.h5"]
    with open_archive(tmp_path / "a", mode="w") as writer:
        assert any("restored" in n for n in writer.notices)
    with open_archive(tmp_path / "a") as reader:
        assert reader.notices == [] and reader.check() == []
    (tmp_path / "a" / "plant.h5").unlink()
    with open_archive(tmp_path / "a") as reader:  # missing, not only damaged
        assert reader.point(POINT).name == "motor DE H"


def test_tree_properties_round_trip_and_validation(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        arc.add_machine("Works", "F-201", name="Cooling fan", nominal_rpm=1460, power_kw=22,
                        iso_group=2, foundation="flexible",
                        ratios={"motor": 1.0, "fan": 890 / 1460})
        p = arc.add_point("Works", "F-201", "fan DE H", location="fan DE", direction="H",
                          unit="g", sensitivity="100mV/g", fmax_hz=1000, lines=3200,
                          window="flat-top", averages=8, overlap=0.75,
                          mapping_patterns=["F-201_fanDEH_*.wav"])
        assert p.props["sensitivity_v_per_unit"] == pytest.approx(0.1)
        for bad in ({"direction": "X"}, {"lines": 50}, {"overlap": 0.95}, {"unit": "furlong"},
                    {"window": "triangle"}, {"colour": "red"}, {"sensitivity": "10mV/(mm/s)"}):
            with pytest.raises(InputError):
                arc.add_point("Works", "F-201", "x", **bad)
        for bad in ({"iso_group": 3}, {"foundation": "soft"}, {"nominal_rpm": -5},
                    {"ratios": {"fan": 0}}):
            with pytest.raises(InputError):
                arc.add_machine("Works", "X-1", **bad)
        for name in ("a/b", " lead", "..", ""):
            with pytest.raises(InputError):
                arc.add_site(name)
        with pytest.raises(InputError, match="already exists"):
            arc.add_machine("Works", "F-201")
        with pytest.raises(InputError, match="no site 'Elsewhere'"):
            arc.add_machine("Elsewhere", "Y-1")
    with open_archive(tmp_path / "a") as arc:
        tree = arc.tree()
        fan = [m for m in tree[0]["machines"] if m["tag"] == "F-201"][0]
        assert fan["ratios"] == {"motor": 1.0, "fan": 890 / 1460}
        assert fan["foundation"] == "flexible" and fan["power_kw"] == 22.0
        point = fan["points"][0]
        assert point["window"] == "flat-top" and point["averages"] == 8
        assert point["mapping_patterns"] == ["F-201_fanDEH_*.wav"]
        assert point["runs"] == 0 and point["latest"] is None
        with pytest.raises(ArchiveError, match="opened for reading"):
            arc.add_site("Other")


def test_point_keys_are_unique_ignoring_case(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        arc.add_machine("Works", "p-101")
        p = arc.add_point("Works", "p-101", "motor de h")
        assert p.key.lower() != arc.point(POINT).key.lower()


def test_runs_trend_and_latest(tmp_path):
    with new_archive(tmp_path / "a", points=2) as arc:
        for week, amp in ((3, 0.3), (1, 0.1), (2, 0.2)):
            arc.import_recording(recording(40 + week, amplitude_g=amp), POINT,
                                 taken=taken(week))
        arc.import_recording(recording(50), "Works/P-101/pump DE H", taken=taken(9))
    with open_archive(tmp_path / "a") as arc:
        t, v = arc.trend(POINT, "velocity_rms_mm_s")
        assert np.all(np.diff(t) > 0) and np.all(np.diff(v) > 0)  # sorted by time taken
        assert [r.taken for r in arc.runs(POINT, since=taken(2))] == [taken(2), taken(3)]
        latest = arc.latest_by_point()
        assert latest[POINT].taken == taken(3)
        assert latest["Works/P-101/pump DE H"].taken == taken(9)
        with pytest.raises(InputError, match="cannot trend"):
            arc.trend(POINT, "colour")
        rid = latest[POINT].run_id
        assert arc.resolve_run(rid[:8]) == rid


def test_streamed_wav_equals_in_memory_import(tmp_path, rng):
    # Two channels of 16-bit PCM in volts with a sensor sensitivity; the streamed
    # import (blocks of 7000 frames) must give the run id, samples and summary of
    # read_recording + import_recording.
    n = 70_001
    t = np.arange(n) / 25600.0
    x = [0.3 * np.sin(2 * np.pi * 50 * t + c) + 0.02 * rng.standard_normal(n) for c in (0, 1)]
    wav = write_wav(tmp_path / "two.wav", Recording(25600.0, [Channel(v, "V") for v in x]),
                    bits=16, sample_format="int", full_scale=2.0)
    options = dict(input_unit="V", full_scale=2.0, sensitivity="100mV/g")
    runs = []
    for name in ("memory", "stream"):
        with new_archive(tmp_path / name) as arc:
            if name == "memory":
                r = arc.import_recording(read_recording(wav, **options), POINT, taken=taken(1))
            else:
                r = arc.import_wav_file(wav, POINT, taken=taken(1), block_frames=7000, **options)
            rec, info = arc.read_run(r.run_id)
            runs.append((r.run_id, rec, info))
            assert arc.check() == []
    (id_a, rec_a, info_a), (id_b, rec_b, info_b) = runs
    assert id_a == id_b
    for a, b in zip(rec_a.channels, rec_b.channels):
        assert np.array_equal(a.samples, b.samples) and a.unit == b.unit == "g"
        assert a.full_scale == b.full_scale == pytest.approx(20.0)
    assert info_a.summary == info_b.summary
    assert info_a.quality == info_b.quality


def test_export_wav_and_csv_with_sidecar(tmp_path):
    rec = recording(60, channels=2)
    with new_archive(tmp_path / "a") as arc:
        rid = arc.import_recording(rec, POINT, rpm=1480.0, notes="after overhaul").run_id
        data, side = arc.export_run(rid, tmp_path / "out.csv")
        back = read_recording(data)
        for a, b in zip(back.channels, rec.channels):
            assert np.array_equal(a.samples, b.samples)  # 17 significant digits
        meta = json.loads(side.read_text())
        assert side.name == "out.json" and meta["run_id"] == rid
        assert meta["notes"] == "after overhaul" and meta["channels"][0]["unit"] == "g"
        wav, _ = arc.export_run(rid, tmp_path / "out.wav")
        w = read_recording(wav)
        assert w.fs_hz == FS_HZ
        assert np.array_equal(w.channels[1].samples,
                              rec.channels[1].samples.astype(np.float32).astype(np.float64))
        with pytest.raises(InputError, match=r"\.wav, \.csv or \.tsv"):
            arc.export_run(rid, tmp_path / "out.xlsx")


def test_temporaries_of_a_stopped_writer_are_ignored_and_cleaned(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        r = arc.import_recording(recording(61), POINT)
    folder = (tmp_path / "a" / r.file).parent
    (folder / "incoming-dead.h5.tmp").write_bytes(b"half a file")
    (tmp_path / "a" / "plant.h5.tmp").write_bytes(b"half")
    with open_archive(tmp_path / "a") as reader:
        assert reader.check() == [] and len(reader.runs()) == 1
    open_archive(tmp_path / "a", mode="w").close()
    assert not list((tmp_path / "a").rglob("*.tmp"))


def test_misplaced_run_file_is_a_problem(tmp_path):
    with new_archive(tmp_path / "a", points=2) as arc:
        r = arc.import_recording(recording(62), POINT)
        other = arc.point("Works/P-101/pump DE H").key
    src = tmp_path / "a" / r.file
    dest = tmp_path / "a" / "runs" / other / src.name
    dest.parent.mkdir(parents=True, exist_ok=True)
    shutil.copyfile(src, dest)
    with open_archive(tmp_path / "a") as arc:
        messages = " ".join(str(p) for p in arc.check())
    assert "stored more than once" in messages and "belongs to folder" in messages


def test_reader_never_writes(tmp_path):
    with new_archive(tmp_path / "a") as arc:
        arc.import_recording(recording(63), POINT)
    before = {p: p.stat().st_mtime_ns for p in (tmp_path / "a").rglob("*")}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with open_archive(tmp_path / "a") as arc:
            arc.check()
            arc.tree()
            with pytest.raises(ArchiveError, match="mode='w'"):
                arc.import_recording(recording(64), POINT)
    assert {p: p.stat().st_mtime_ns for p in (tmp_path / "a").rglob("*")} == before
