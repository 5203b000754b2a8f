"""Command line for bearings, envelope, orders and speed."""

import json
from pathlib import Path

import pytest

from engine.cli import main

CWRU = Path(__file__).resolve().parents[2] / "shared" / "data" / "cwru"
SAMPLES = Path(__file__).resolve().parents[1] / "sample_data"
DE_BEARING = ["--elements", "9", "--element-diameter", "0.3126", "--pitch-diameter", "1.537",
              "--geometry-unit", "in"]


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    return code, json.loads(capsys.readouterr().out)


def test_bearing_matches_cwru_table(capsys):
    # Case Western Reserve University Bearing Data Center, drive-end bearing table
    # (multiples of shaft speed): BPFI 5.4152, BPFO 3.5848, FTF 0.39828, 2×BSF 4.7135.
    code, d = run_json(capsys, ["bearing", *DE_BEARING, "--rpm", "1797"])
    assert code == 0
    assert d["bpfi"] == pytest.approx(5.4152, rel=1e-3)
    assert d["bpfo"] == pytest.approx(3.5848, rel=1e-3)
    assert d["ftf"] == pytest.approx(0.39828, rel=1e-3)
    assert 2 * d["bsf"] == pytest.approx(4.7135, rel=1e-3)
    assert d["bpfo_hz"] == pytest.approx(3.5848 * 1797 / 60, rel=1e-3)


@pytest.mark.skipif(not CWRU.is_dir(), reason="open bearing recordings not present in ../shared/data/cwru")
def test_envelope_finds_outer_race_defect_in_cwru_record(capsys):
    # CWRU record 130 (outer race, 0.007 in): BPFO = 3.5848 × shaft speed (data center's
    # table), among the top envelope peaks within 1.5 % (slip).
    code, d = run_json(capsys, ["envelope", str(CWRU / "12k_drive_end_outer_race_007_load0_130.mat"),
                                "--variable", "X130_DE_time", "--sample-rate", "12000",
                                *DE_BEARING, "--peaks", "3"])
    assert code == 0 and d["auto"] is True
    bpfo = 3.5848 * 1796 / 60
    assert any(abs(p["frequency_hz"] / bpfo - 1) < 0.015 and p["source"] == "BPFO"
               for p in d["peaks"])
    best = max(d["defects"], key=lambda m: m["snr_db"])
    assert best["name"] == "BPFO" and best["harmonics_found"] >= 2


def test_orders_on_sample_runup(capsys):
    path = str(SAMPLES / "m501-mixer-de-h-runup-with-tach.wav")
    code, d = run_json(capsys, ["orders", path, "--full-scale", "10", "--tach-channel", "1"])
    assert code == 0
    assert d["peaks"][0]["order"] == pytest.approx(1.0, abs=0.02)
    assert d["rpm_min"] == pytest.approx(300, rel=0.05) and d["rpm_max"] == pytest.approx(1500, rel=0.02)
    code, cut = run_json(capsys, ["orders", path, "--full-scale", "10", "--tach-channel", "1",
                                  "--cut", "1"])
    # The demo mixer crosses a 15 Hz structural resonance: the 1× cut peaks near 900 rpm.
    rpm_peak = cut["rpm"][max(range(len(cut["amplitude"])), key=cut["amplitude"].__getitem__)]
    assert rpm_peak == pytest.approx(900, rel=0.03)
    assert main(["orders", path, "--tach-channel", "0"]) == 2


def test_speed_without_tach(capsys):
    code, d = run_json(capsys, ["speed", str(SAMPLES / "p101-motor-de-h-week16.wav"),
                                "--near-rpm", "1500"])
    assert code == 0 and d["rpm"] == pytest.approx(1484, rel=0.005)


def test_bearing_bad_geometry(capsys):
    assert main(["bearing", "--elements", "9", "--element-diameter", "20",
                 "--pitch-diameter", "10"]) == 2
    assert "error" in capsys.readouterr().err
