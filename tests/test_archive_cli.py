"""The archive commands of the command line, through engine.cli.main."""

from __future__ import annotations

import json

import h5py
import numpy as np
import pytest
from _archive_helpers import recording

from engine.cli import main
from engine.io import read_recording, write_wav
from engine.recording import Channel, Recording
from engine.units import STANDARD_GRAVITY

pytestmark = pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
POINT = "Demo Works/P-101/motor DE H"


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    out = capsys.readouterr().out
    return code, json.loads(out)


@pytest.fixture
def archive(tmp_path, capsys):
    """An archive with one machine and one point, made through the command line."""
    a = str(tmp_path / "demo-works.shaftwatch")
    assert main(["new", a, "--plant", "Demo Works"]) == 0
    assert main(["add-site", a, "Demo Works"]) == 0
    capsys.readouterr()
    code, d = run_json(capsys, ["add-machine", a, "--site", "Demo Works", "--tag", "P-101",
                                "--name", "Raw-water pump 1", "--rpm", "1480",
                                "--power-kw", "75", "--iso-group", "2",
                                "--foundation", "rigid", "--ratio", "motor=1",
                                "--ratio", "pump=1"])
    assert code == 0 and d["ratios"] == {"motor": 1.0, "pump": 1.0} and d["iso_group"] == 2
    code, d = run_json(capsys, ["add-point", a, POINT, "--location", "motor DE",
                                "--direction", "H", "--fmax", "500", "--lines", "800",
                                "--window", "flat-top", "--pattern", "P-101_motorDEH_*.wav"])
    assert code == 0 and d["fmax_hz"] == 500.0 and d["mapping_patterns"] == [
        "P-101_motorDEH_*.wav"]
    capsys.readouterr()
    return a


def _sine_wav(path, amplitude_g=1.0, f_hz=100.0):
    t = np.arange(51200) / 25600.0
    x = amplitude_g * np.sin(2 * np.pi * f_hz * t)
    return write_wav(path, Recording(25600.0, [Channel(x, "g")]), bits=64)


def test_new_refuses_an_existing_archive(archive, capsys):
    assert main(["new", archive]) == 2
    assert "already exists" in capsys.readouterr().err


def test_import_tree_runs_show_export_check_rebuild(archive, tmp_path, capsys):
    survey = tmp_path / "survey"
    survey.mkdir()
    _sine_wav(survey / "P-101_motorDEH_2026-08-03.wav")
    write_wav(survey / "P-101_motorDEH_2026-08-10.wav", recording(5, n=51200, fs_hz=25600.0))
    (survey / "P-101_motorDEH_bad.wav").write_bytes(b"RIFF\x04\x00\x00\x00WAVE")
    code, d = run_json(capsys, ["import", archive, str(survey), "--taken",
                                "2026-08-03T08:00:00Z", "--rpm", "1480"])
    assert code == 0
    assert len(d["imported"]) == 2 and d["duplicates"] == []
    assert d["skipped"][0]["file"].endswith("P-101_motorDEH_bad.wav")
    run_ids = [i["run_id"] for i in d["imported"]]

    code, d = run_json(capsys, ["import", archive, str(survey / "P-101_motorDEH_2026-08-03.wav")])
    assert code == 0 and d["imported"] == [] and d["duplicates"][0]["run_id"] == run_ids[0]
    code, d = run_json(capsys, ["import", archive, str(survey / "P-101_motorDEH_bad.wav")])
    assert code == 2 and d["imported"] == [] and len(d["skipped"]) == 1

    code, d = run_json(capsys, ["tree", archive])
    point = d["sites"][0]["machines"][0]["points"][0]
    assert code == 0 and point["path"] == POINT and point["runs"] == 2
    # 1 g peak at 100 Hz: g_n/(2π·100)/√2 = 11.04 mm/s RMS (CGPM standard gravity).
    velocities = sorted(r["velocity_rms_mm_s"] for r in run_json(
        capsys, ["runs", archive, "--point", POINT])[1]["runs"])
    assert velocities[-1] == pytest.approx(STANDARD_GRAVITY / (2 * np.pi * 100) / 2**0.5 * 1e3,
                                           rel=1e-6)
    assert point["latest"]["taken"] == "2026-08-03T08:00:00.000000Z"

    assert main(["tree", archive]) == 0
    text = capsys.readouterr().out
    assert "P-101" in text and "motor DE H" in text and "2026-08-03 08:00" in text

    code, d = run_json(capsys, ["runs", archive, "--since", "2026-08-04"])
    assert code == 0 and d["runs"] == []
    assert main(["runs", archive]) == 0
    assert run_ids[0] in capsys.readouterr().out

    code, d = run_json(capsys, ["show", archive, run_ids[0][:8]])
    assert code == 0 and d["run_id"] == run_ids[0] and d["rpm"] == 1480.0
    assert d["source"] == "P-101_motorDEH_2026-08-03.wav" and d["sample_rate_hz"] == 25600.0
    assert main(["show", archive, run_ids[0]]) == 0
    assert "velocity RMS 10–1000 Hz" in capsys.readouterr().out

    out = tmp_path / "run.csv"
    code, d = run_json(capsys, ["export", archive, run_ids[0], "-o", str(out)])
    assert code == 0 and json.loads(out.with_suffix(".json").read_text())["run_id"] == run_ids[0]
    back = read_recording(out)
    assert back.fs_hz == 25600.0 and back.n_samples == 51200

    code, d = run_json(capsys, ["check", archive])
    assert code == 0 and d == {"runs": 2, "problems": []}
    code, d = run_json(capsys, ["rebuild", archive])
    assert code == 0 and d["rows"] == 2
    assert main(["check", archive]) == 0
    assert "2 run(s), no problems" in capsys.readouterr().out


def test_check_exits_1_on_a_damaged_run(archive, tmp_path, capsys):
    _sine_wav(tmp_path / "x.wav")
    assert main(["import", archive, str(tmp_path / "x.wav"), "--point", POINT]) == 0
    capsys.readouterr()
    runs = list((tmp_path / "demo-works.shaftwatch" / "runs").glob("*/*.h5"))
    with h5py.File(runs[0], "r+") as f:
        f["channels/0/samples"][0] = 42.0
    assert main(["check", archive]) == 1
    assert "do not match their sha256" in capsys.readouterr().out


def test_dry_run_and_remember(archive, tmp_path, capsys):
    _sine_wav(tmp_path / "M1_2026-08-03.wav")
    code, d = run_json(capsys, ["import", archive, str(tmp_path), "--dry-run"])
    assert code == 2 and d["to_import"] == 0  # no pattern matches "M1_..."
    code, d = run_json(capsys, ["import", archive, str(tmp_path / "M1_2026-08-03.wav"),
                                "--point", POINT, "--remember", "--dry-run"])
    assert code == 0 and d["files"][0]["point"] == POINT
    assert run_json(capsys, ["runs", archive])[1]["runs"] == []  # nothing written
    code, d = run_json(capsys, ["import", archive, str(tmp_path / "M1_2026-08-03.wav"),
                                "--point", POINT, "--remember"])
    assert d["remembered"] == {POINT: ["M*_*-*-*.wav"]}


def test_spectrum_and_levels_of_an_archive_run(archive, tmp_path, capsys):
    _sine_wav(tmp_path / "s.wav", amplitude_g=2.0, f_hz=120.0)
    code, d = run_json(capsys, ["import", archive, str(tmp_path / "s.wav"), "--point", POINT])
    rid = d["imported"][0]["run_id"]
    code, d = run_json(capsys, ["spectrum", "--archive", archive, "--run", rid, "--peaks", "1"])
    assert code == 0
    # The point's settings are the defaults: Fmax 500 Hz, 800 lines, flat-top window.
    assert d["fmax_hz"] == 500.0 and d["lines"] == 800 and d["window"] == "flat-top"
    # Flat-top amplitude of a 2 g peak sine is 2/√2 g RMS (Heinzel et al. 2002: HFT95
    # has under 0.01 dB of scalloping).
    assert d["peaks"][0]["frequency_hz"] == pytest.approx(120.0, abs=0.1)
    assert d["peaks"][0]["amplitude"] == pytest.approx(2 / np.sqrt(2), rel=2e-3)
    code, d = run_json(capsys, ["spectrum", "--archive", archive, "--run", rid, "--lines",
                                "1600", "--fmax", "1000"])
    assert d["lines"] == 1600 and d["fmax_hz"] == 1000.0  # given options win
    code, d = run_json(capsys, ["levels", "--archive", archive, "--run", rid])
    assert code == 0
    assert d["velocity_rms_mm_s"] == pytest.approx(
        2 * STANDARD_GRAVITY / (2 * np.pi * 120) / 2**0.5 * 1e3, rel=1e-6)
    assert main(["spectrum", "--archive", archive]) == 2
    assert "--run" in capsys.readouterr().err
    assert main(["spectrum", str(tmp_path / "s.wav"), "--archive", archive, "--run", rid]) == 2
    assert "not both" in capsys.readouterr().err
    assert main(["levels", "--archive", archive, "--run", rid, "--sensitivity", "100"]) == 2
    assert "apply to reading a file" in capsys.readouterr().err


def test_errors_name_the_problem(archive, capsys):
    assert main(["add-point", archive, "Demo Works/P-101"]) == 2
    assert "SITE/MACHINE/POINT" in capsys.readouterr().err
    assert main(["add-machine", archive, "--site", "Nowhere", "--tag", "X"]) == 2
    assert "no site 'Nowhere'" in capsys.readouterr().err
    assert main(["add-machine", archive, "--site", "Demo Works", "--tag", "X",
                 "--ratio", "fan"]) == 2
    assert "SHAFT=RATIO" in capsys.readouterr().err
    assert main(["show", archive, "0000000000"]) == 2
    assert "no run" in capsys.readouterr().err
    assert main(["tree", "/nonexistent/archive"]) == 2
    assert "no Shaftwatch archive" in capsys.readouterr().err
