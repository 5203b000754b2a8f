"""``shaftwatch demo``: the simulated survey of the invented demo plant."""

import json

import pytest

from engine.cli import main
from engine.demo_plant import PLANT, demo_signal, expected_velocity_mm_s


def test_demo_survey_json(capsys):
    assert main(["demo", "--survey", "15", "--json"]) == 0
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
    assert main(["demo", "--survey", "1"]) == 0
    out = capsys.readouterr().out
    assert "P-102" in out and "velocity mm/s RMS" in out and "invented" in out
    assert main(["demo", "--survey", "40"]) == 2
    assert "--survey week must be between 1 and 16" in capsys.readouterr().err


def test_demo_builds_archive_once_and_shows_tree(tmp_path, capsys):
    from engine.archive import open_archive
    from engine.demo_archive import demo_runs

    path = tmp_path / "dw.shaftwatch"
    assert main(["demo", str(path), "--json"]) == 0
    tree = json.loads(capsys.readouterr().out)
    assert tree["plant"] == "Demo Works"
    machines = {m["tag"]: m for m in tree["sites"][0]["machines"]}
    assert set(machines) == {m.tag for m in PLANT.machines}
    assert all(p["runs"] == PLANT.weeks for m in machines.values() for p in m["points"])
    with open_archive(path) as arc:
        assert len(arc.runs()) == len(demo_runs())
        assert arc.check() == []
        # P-102's pump drive end rises through the ISO 20816-3 group 2 rigid B/C (2.8)
        # and C/D (4.5 mm/s) boundaries (from memory) over the surveys; P-101 stays low.
        _, p102 = arc.trend("Demo Works/P-102/pump DE H", "velocity_rms_mm_s")
        _, p101 = arc.trend("Demo Works/P-101/pump DE H", "velocity_rms_mm_s")
        assert p102[0] < 2.8 < 4.5 < p102[-1] and max(p101) < 2.8
    # A second call finds the archive and only shows it.
    assert main(["demo", str(path)]) == 0
    assert "P-102" in capsys.readouterr().out
