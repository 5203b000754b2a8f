"""The command line on single recordings: spectrum, levels, info."""

import json
import subprocess
import sys

import numpy as np
import pytest

from engine.cli import main
from engine.io.wav import write_wav
from engine.recording import Channel, Recording

FS = 25600.0


def make_wav(path, channels, unit="g", bits=32, sample_format="float", full_scale=None):
    rec = Recording(fs_hz=FS, channels=[Channel(samples=np.asarray(c, float), unit=unit)
                                        for c in channels], source=str(path))
    write_wav(path, rec, bits=bits, sample_format=sample_format, full_scale=full_scale)
    return str(path)


def sine(f, amp=1.0, seconds=4.0):
    t = np.arange(int(FS * seconds)) / FS
    return amp * np.sin(2 * np.pi * f * t + 0.2)


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    out = capsys.readouterr().out
    return code, json.loads(out)


def test_spectrum_json_fields_and_peaks(tmp_path, capsys):
    rpm = 1480.0
    f1 = rpm / 60
    path = make_wav(tmp_path / "p101.wav", [sine(f1, 0.5) + sine(2 * f1, 0.2)
                                           + sine(7.3 * f1, 0.1)])
    code, d = run_json(capsys, ["spectrum", path, "--unit", "mm/s", "--scale", "peak",
                                "--fmax", "1000", "--lines", "800", "--rpm", str(rpm)])
    assert code == 0
    for key in ("unit", "scale", "window", "fmax_hz", "lines", "resolution_hz", "enbw_hz",
                "frequency_hz", "amplitude", "peaks", "warnings"):
        assert key in d
    assert d["unit"] == "mm/s" and d["lines"] == 800 and d["fmax_hz"] == 1000
    assert len(d["frequency_hz"]) == len(d["amplitude"]) == 801
    amps = [p["amplitude"] for p in d["peaks"]]
    assert amps == sorted(amps, reverse=True)
    top = d["peaks"][0]
    assert top["order"] == pytest.approx(1.0, abs=0.01)
    # First principles (g_n = 9.80665 m/s²): 0.5 g peak at f1 is 0.5·9806.65/(2π·f1) mm/s.
    assert top["amplitude"] == pytest.approx(0.5 * 9806.65 / (2 * np.pi * f1), rel=0.005)
    assert d["enbw_hz"] == pytest.approx(1.5 * d["resolution_hz"])  # Hann, Harris 1978


def test_spectrum_table_and_csv_output(tmp_path, capsys):
    path = make_wav(tmp_path / "a.wav", [sine(300.0)])
    out_csv = tmp_path / "spec.csv"
    assert main(["spectrum", path, "--lines", "400", "--rpm", "1800", "-o", str(out_csv)]) == 0
    text = capsys.readouterr().out
    assert "frequency Hz" in text and "order" in text and "300" in text
    data = np.loadtxt(out_csv, delimiter=",", skiprows=1)
    assert data.shape == (401, 2)


def test_sensitivity_from_volts(tmp_path, capsys):
    # 100 mV/g sensor: 0.1 V peak is 1 g peak.
    path = make_wav(tmp_path / "v.wav", [sine(100.0, 0.1)], unit="V")
    code, d = run_json(capsys, ["levels", path, "--input-unit", "V", "--sensitivity",
                                "100mV/g"])
    assert code == 0
    assert d["acceleration_peak_g"] == pytest.approx(1.0, rel=1e-4)
    # From first principles: 11.04 mm/s RMS for 1 g peak at 100 Hz.
    assert d["velocity_rms_mm_s"] == pytest.approx(11.036, rel=1e-3)


def test_levels_json_keys(tmp_path, capsys):
    path = make_wav(tmp_path / "b.wav", [sine(50.0, 0.3)], bits=16, sample_format="int",
                    full_scale=1.0)
    code, d = run_json(capsys, ["levels", path])
    assert code == 0
    for key in ("velocity_rms_mm_s", "velocity_band_hz", "acceleration_rms_g",
                "acceleration_peak_g", "crest_factor", "kurtosis", "displacement_pp_um",
                "warnings"):
        assert key in d
    assert d["velocity_band_hz"] == [10.0, 1000.0]
    assert d["acceleration_rms_g"] == pytest.approx(0.3 / np.sqrt(2), rel=1e-3)


def test_info_reports_channels_and_quality(tmp_path, capsys):
    clipped = np.clip(sine(60.0, 2.0), -0.9999, 0.9999)  # held at full scale
    path = make_wav(tmp_path / "c.wav", [sine(60.0, 0.9), clipped], bits=16, sample_format="int",
                    full_scale=1.0)
    code, d = run_json(capsys, ["info", path])
    assert code == 0
    assert d["sample_rate_hz"] == FS and len(d["channels"]) == 2
    assert any(q["code"] == "clipping" and q["channel"] == 1 for q in d["quality"])


@pytest.mark.parametrize("argv,needle", [
    (["spectrum", "{missing}"], "missing.wav"),
    (["spectrum", "{good}", "--channel", "3"], "channel 3 does not exist"),
    (["spectrum", "{good}", "--unit", "furlong/s"], "not a known unit"),
    (["spectrum", "{good}", "--fmax", "50000"], "Fmax"),
    (["spectrum", "{good}", "--lines", "25600"], "lines at Fmax"),
    (["levels", "{empty}"], "empty.wav"),
    (["spectrum", "{good}", "--sensitivity", "100mV/g"], "volts"),
])
def test_bad_input_exits_2_with_message(tmp_path, capsys, argv, needle):
    good = make_wav(tmp_path / "good.wav", [sine(100.0, seconds=1.0)])
    (tmp_path / "empty.wav").write_bytes(b"")
    names = {"missing": str(tmp_path / "missing.wav"), "good": good,
             "empty": str(tmp_path / "empty.wav")}
    code = main([a.format(**names) for a in argv])
    err = capsys.readouterr().err
    assert code == 2
    assert needle in err and err.startswith("shaftwatch ")


def test_engine_never_imports_qt():
    # STYLE habit 1: the engine is headless.  A fresh interpreter imports the CLI and
    # every engine module without pulling in PySide6 or pyqtgraph.
    code = ("import sys, pkgutil, importlib, engine, engine.cli\n"
            "for m in pkgutil.walk_packages(engine.__path__, 'engine.'):\n"
            "    importlib.import_module(m.name)\n"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph')]\n"
            "assert not bad, bad\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_help_everywhere(capsys):
    for cmd in ("spectrum", "levels", "info"):
        with pytest.raises(SystemExit) as exc:
            main([cmd, "--help"])
        assert exc.value.code == 0
    assert "--fmax" in capsys.readouterr().out


def test_band_rms_and_band_waveform(tmp_path, capsys):
    # Band RMS of two tones: each band holds one tone of RMS A/√2 (first principles).
    path = make_wav(tmp_path / "two.wav", [sine(120.0, 1.0) + sine(900.0, 0.5)])
    code, d = run_json(capsys, ["spectrum", path, "--lines", "1600", "--band", "100", "140",
                                "--band", "850", "950"])
    assert code == 0
    assert d["bands"][0]["rms"] == pytest.approx(1 / np.sqrt(2), rel=0.005)
    assert d["bands"][1]["rms"] == pytest.approx(0.5 / np.sqrt(2), rel=0.005)
    out = tmp_path / "kept.wav"
    code, d = run_json(capsys, ["band-waveform", path, "--band", "800", "1000", "-o", str(out)])
    assert code == 0 and d["rms_out"] == pytest.approx(0.5 / np.sqrt(2), rel=1e-3)
    code, d = run_json(capsys, ["levels", str(out)])
    assert d["acceleration_peak_g"] == pytest.approx(0.5, rel=1e-3)
    assert main(["band-waveform", path, "--band", "800", "1000", "-o",
                 str(tmp_path / "x.flac")]) == 2
