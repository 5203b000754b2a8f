"""``shaftwatch demo``: the simulated survey of the invented demo plant."""

import json

import pytest

from engine.cli import main
from engine.demo_plant import PLANT, demo_signal, expected_velocity_mm_s


def test_demo_survey_json(capsys):
    assert main(["demo", "--week", "15", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["site"] == "Demo Works" and d["week"] == 15
    assert len(d["points"]) == sum(len(m.points) for m in PLANT.machines)
    by = {(r["machine"], r["point"]): r for r in d["points"]}
    # The measured overall velocity agrees with the simulator's analytic level (first
    # principles: Σ (A·g_n/ω)²/2 over the lines in 10–1000 Hz) within 5 %.
    for key in [("P-101", "pump DE H"), ("P-102", "pump DE V"), ("F-201", "fan DE H")]:
        signal, info = demo_signal(*key, 15, fs_hz=25600.0)
        expected = expected_velocity_mm_s(signal, fs_hz=25600.0, band_hz=(10.0, 1000.0))
        assert by[key]["velocity_rms_mm_s"] == pytest.approx(expected, rel=0.05)


def test_demo_table_and_bad_week(capsys):
    assert main(["demo", "--week", "1"]) == 0
    out = capsys.readouterr().out
    assert "P-102" in out and "velocity mm/s RMS" in out and "invented" in out
    assert main(["demo", "--week", "40"]) == 2
    assert "--week must be between 1 and 16" in capsys.readouterr().err
