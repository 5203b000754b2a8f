"""Command line for machine models, the bearing list, diagnose and peak labels."""

import json
import math
from pathlib import Path

import numpy as np
import pytest

from engine.archive import create_archive
from engine.bearings import defect_orders
from engine.cli import main
from engine.commands import model_cmds
from engine.demo_plant import BEARING_B, PLANT
from engine.io.wav import write_wav
from engine.kinematics import MachineModel, model_from_demo
from engine.recording import Channel, Recording

SAMPLES = Path(__file__).resolve().parents[1] / "sample_data"
MACHINE = "Works/F-1"
FS = 25600.0
P102_PUMP = "Demo Works/P-102/pump DE H"
P101_PUMP = "Demo Works/P-101/pump DE H"


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out)


def run_fail(capsys, argv) -> str:
    """Run a command that must fail with exit status 2; its one-line message."""
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.startswith("shaftwatch ") and err.count("\n") == 1
    return err


def small_archive(path: Path, *, fan_point: bool = True) -> str:
    """Site Works, machine F-1 (motor and fan shafts), a motor point and a fan point."""
    with create_archive(path, plant_name="Test Works") as arc:
        arc.add_site("Works")
        arc.add_machine("Works", "F-1", name="Test fan", nominal_rpm=1460.0,
                        ratios={"motor": 1.0})
        arc.add_point("Works", "F-1", "motor DE H", location="motor DE", direction="H",
                      shaft="motor")
        if fan_point:
            arc.add_point("Works", "F-1", "fan DE H", location="fan DE", direction="H",
                          shaft="fan")
    return str(path)


def fan_model_dict() -> dict:
    """A belt-driven fan: every kind of part (gear pair on a second stage included)."""
    return {
        "version": 1,
        "shafts": [{"name": "motor", "ratio": 1.0}, {"name": "fan", "ratio": None},
                   {"name": "aux", "ratio": None}],
        "gears": [{"driver_shaft": "fan", "driven_shaft": "aux", "driver_teeth": 20,
                   "driven_teeth": 50}],
        "belts": [{"driver_shaft": "motor", "driven_shaft": "fan", "driver_diameter": 180.0,
                   "driven_diameter": 300.0, "belt_length": 2400.0}],
        "blades": [{"shaft": "fan", "count": 8}],
        "bearings": [{"shaft": "fan", "label": "fan DE",
                      "geometry": {"label": "fan bearing", "elements": 11,
                                   "element_diameter": 19.8, "pitch_diameter": 104.0,
                                   "contact_angle_deg": 15.0, "unit": "mm"}}],
        "line_frequency_hz": 50.0, "motor_shaft": "motor", "poles": 4,
    }


def write(path: Path, data) -> str:
    path.write_text(json.dumps(data) if not isinstance(data, str) else data, encoding="utf-8")
    return str(path)


# -- machine models -----------------------------------------------------------------------
def test_model_round_trip_set_show_export(tmp_path, capsys):
    arc = small_archive(tmp_path / "a.shaftwatch")
    d = run_json(capsys, ["model", arc, MACHINE])
    assert d["model"] is None and d["speed_ratios"] == {"motor": 1.0}
    model_file = write(tmp_path / "fan.json", fan_model_dict())
    d = run_json(capsys, ["model", arc, MACHINE, "--set", model_file])
    assert d["changed"] is True and d["model"] == fan_model_dict()
    shown = run_json(capsys, ["model", arc, MACHINE])
    assert shown["model"] == fan_model_dict() and shown["changed"] is False
    # First principles: a belt turns the driven pulley at d_driver/d_driven (180/300);
    # a gear pair at driver/driven teeth (20/50); the machine's ratios follow the model.
    assert shown["speed_ratios"] == pytest.approx({"motor": 1.0, "fan": 0.6, "aux": 0.24})
    derived = shown["derived"]
    assert derived["gears"][0]["mesh_order"] == pytest.approx(20 * 0.6)
    assert derived["belts"][0]["belt_order"] == pytest.approx(math.pi * 180 / 2400)
    assert derived["blades"][0]["pass_order"] == pytest.approx(8 * 0.6)
    assert derived["synchronous_rpm"] == pytest.approx(120 * 50 / 4)  # 120 f / p
    assert {p["name"]: p["shaft"] for p in shown["points"]} == {"motor DE H": "motor",
                                                                "fan DE H": "fan"}
    out = tmp_path / "exported.json"
    d = run_json(capsys, ["model", arc, MACHINE, "--export", str(out)])
    assert d["exported"] == str(out)
    assert json.loads(out.read_text(encoding="utf-8")) == fan_model_dict()
    # Setting the same model again stores nothing.
    plant = Path(arc) / "plant.h5"
    before = plant.read_bytes()
    assert run_json(capsys, ["model", arc, MACHINE, "--set", str(out)])["changed"] is False
    assert plant.read_bytes() == before
    assert main(["model", arc, MACHINE]) == 0
    table = capsys.readouterr().out
    for text in ("motor–fan", "fan–aux", "fan DE", "BPFO", "synchronous 1500 rpm"):
        assert text in table


def test_model_edits_add_and_remove_parts(tmp_path, capsys):
    arc = small_archive(tmp_path / "a.shaftwatch")
    base = ["model", arc, MACHINE]
    # Without a model the edits start from the machine's shafts and ratios.
    d = run_json(capsys, base + ["--add-shaft", "fan", "--add-belt", "motor", "fan", "180",
                                 "295", "2400"])
    assert d["model"]["shafts"] == [{"name": "motor", "ratio": 1.0},
                                    {"name": "fan", "ratio": None}]
    assert d["derived"]["ratios"]["fan"] == pytest.approx(180 / 295)  # d_driver / d_driven
    d = run_json(capsys, base + ["--add-blades", "fan", "8", "--add-bearing", "fan", "fan DE",
                                 "--elements", "11", "--element-diameter", "19.8",
                                 "--pitch-diameter", "104", "--contact-angle", "15"])
    assert d["model"]["blades"] == [{"shaft": "fan", "count": 8}]
    b = d["derived"]["bearings"][0]
    assert b["label"] == "fan DE" and b["shaft"] == "fan"
    # Harris & Kotzalas: BPFO = n/2 · (1 − d/D · cos α).
    rho = 19.8 / 104 * math.cos(math.radians(15))
    assert b["orders"]["bpfo"] == pytest.approx(11 / 2 * (1 - rho), rel=1e-12)
    d = run_json(capsys, base + ["--add-shaft", "aux=0.5", "--add-gear", "motor", "aux",
                                 "30", "60", "--line-frequency", "60", "--poles", "4"])
    assert d["model"]["gears"] == [{"driver_shaft": "motor", "driven_shaft": "aux",
                                    "driver_teeth": 30, "driven_teeth": 60}]
    assert d["model"]["motor_shaft"] == "motor"  # the reference shaft drives the poles
    assert d["derived"]["synchronous_rpm"] == pytest.approx(1800.0)  # 120 · 60 / 4
    # Removing a part someone needs fails and names the field; nothing is stored.
    plant = Path(arc) / "plant.h5"
    before = plant.read_bytes()
    err = run_fail(capsys, base + ["--remove-belt", "motor", "fan"])
    assert "shafts[1].ratio" in err and "'fan'" in err
    err = run_fail(capsys, base + ["--remove-shaft", "aux"])
    assert "gears[0].driven_shaft 'aux'" in err
    err = run_fail(capsys, base + ["--remove-gear", "aux", "motor"])
    assert "--remove-gear" in err and "motor aux" in err
    err = run_fail(capsys, base + ["--add-gear", "motor", "aux", "30", "0"])
    assert "--add-gear" in err and "driven_teeth" in err
    err = run_fail(capsys, base + ["--add-bearing", "fan", "fan NDE"])
    assert "--from-list" in err
    err = run_fail(capsys, base + ["--add-shaft", "fan=0.6"])
    assert "already has shaft 'fan'" in err
    err = run_fail(capsys, base + ["--elements", "9", "--element-diameter", "5",
                                   "--pitch-diameter", "30"])
    assert "--add-bearing" in err
    assert plant.read_bytes() == before
    # Removals come first, so a part can be replaced in one command.
    d = run_json(capsys, base + ["--remove-shaft", "aux", "--remove-gear", "motor", "aux",
                                 "--remove-blades", "fan", "--remove-bearing", "fan DE",
                                 "--line-frequency", "none"])
    m = d["model"]
    assert [s["name"] for s in m["shafts"]] == ["motor", "fan"]
    assert m["gears"] == m["blades"] == m["bearings"] == []
    assert m["line_frequency_hz"] is None and m["poles"] is None
    assert d["speed_ratios"] == pytest.approx({"motor": 1.0, "fan": 180 / 295})


@pytest.mark.parametrize("content,needles", [
    ("{not json", ["not valid JSON at line 1"]),
    ({**fan_model_dict(), "gears": [{"driver_shaft": "fan", "driven_shaft": "aux",
                                     "driver_teeth": 0, "driven_teeth": 50}]},
     ["gears[0].driver_teeth"]),
    ({**fan_model_dict(), "colour": "red"}, ["unknown field", "'colour'"]),
    ({**fan_model_dict(), "bearings": [{"shaft": "fan", "label": "fan DE", "geometry": {
        "label": "x", "elements": 9, "element_diameter": 90.0, "pitch_diameter": 80.0}}]},
     ["bearings[0].geometry", "element_diameter"]),
    ({"version": 1, "shafts": [{"name": "motor", "ratio": 1.0}]}, ["'fan DE H'", "'fan'"]),
])
def test_bad_model_file_exit_2_and_nothing_changes(tmp_path, capsys, content, needles):
    arc = small_archive(tmp_path / "a.shaftwatch")
    good = write(tmp_path / "good.json", fan_model_dict())
    run_json(capsys, ["model", arc, MACHINE, "--set", good])
    plant, prev = Path(arc) / "plant.h5", Path(arc) / "plant.h5.prev"
    before, before_prev = plant.read_bytes(), prev.read_bytes()
    bad = write(tmp_path / "bad-model.json", content)
    err = run_fail(capsys, ["model", arc, MACHINE, "--set", bad])
    if "'fan DE H'" not in needles:  # the point check names the machine, not the file
        assert "bad-model.json" in err
    for n in needles:
        assert n in err
    assert plant.read_bytes() == before and prev.read_bytes() == before_prev
    assert run_json(capsys, ["model", arc, MACHINE])["model"] == fan_model_dict()


def test_model_file_format_in_the_docs_is_a_valid_model(capsys):
    # The example of the model file format in the module notes (and the help) must load.
    text = model_cmds.__doc__
    example = text[text.index('{"version"'):text.index("* ``shafts``")]
    model = MachineModel.from_dict(json.loads(example), source="docs")
    assert model.ratio("output") == pytest.approx(180 / 250 * 23 / 67)  # belt, then gears
    with pytest.raises(SystemExit):
        main(["model", "--help"])
    assert '"driver_teeth": 23' in capsys.readouterr().out


def test_model_errors_name_the_machine(tmp_path, capsys):
    arc = small_archive(tmp_path / "a.shaftwatch")
    assert "SITE/MACHINE" in run_fail(capsys, ["model", arc, "F-1"])
    assert "F-9" in run_fail(capsys, ["model", arc, "Works/F-9"])
    assert "no machine model to export" in run_fail(
        capsys, ["model", arc, MACHINE, "--export", str(tmp_path / "x.json")])
    assert "cannot read" in run_fail(capsys, ["model", arc, MACHINE, "--set",
                                              str(tmp_path / "missing.json")])


# -- the bearing list ---------------------------------------------------------------------
CWRU_DE = ["--elements", "9", "--element-diameter", "0.3126", "--pitch-diameter", "1.537",
           "--geometry-unit", "in"]


def test_bearing_list_add_list_remove(tmp_path, capsys):
    arc = small_archive(tmp_path / "a.shaftwatch", fan_point=False)
    assert run_json(capsys, ["bearings", arc])["bearings"] == []
    d = run_json(capsys, ["bearings", arc, "--add", "CWRU drive end", *CWRU_DE])
    (row,) = d["bearings"]
    assert row["label"] == "CWRU drive end" and row["unit"] == "in" and row["elements"] == 9
    o = row["orders"]
    # Case Western Reserve University Bearing Data Center, drive-end bearing table
    # (multiples of shaft speed), from memory: BPFI 5.4152, BPFO 3.5848, FTF 0.3983,
    # 2×BSF 4.7135; within 0.1 %.
    assert o["bpfi"] == pytest.approx(5.4152, rel=1e-3)
    assert o["bpfo"] == pytest.approx(3.5848, rel=1e-3)
    assert o["ftf"] == pytest.approx(0.3983, rel=1e-3)
    assert o["bsf2"] == pytest.approx(4.7135, rel=1e-3)
    d = run_json(capsys, ["bearings", arc, "--add", "small", "--elements", "8",
                          "--element-diameter", "7.9", "--pitch-diameter", "39"])
    assert [r["label"] for r in d["bearings"]] == ["CWRU drive end", "small"]
    assert "already has 'small'" in run_fail(capsys, ["bearings", arc, "--add", "small",
                                                      *CWRU_DE])
    d = run_json(capsys, ["bearings", arc, "--add", "small", "--replace", "--elements", "10",
                          "--element-diameter", "7.9", "--pitch-diameter", "39"])
    assert [r["elements"] for r in d["bearings"]] == [9, 10]
    # A machine model copies a list entry; the list shows who uses it.
    d = run_json(capsys, ["model", arc, MACHINE, "--add-bearing", "motor", "motor DE",
                          "--from-list", "CWRU drive end"])
    geo = d["model"]["bearings"][0]["geometry"]
    assert geo["pitch_diameter"] == 1.537 and geo["unit"] == "in"
    d = run_json(capsys, ["bearings", arc])
    assert d["bearings"][0]["used_by"] == ["Works/F-1 motor DE"]
    d = run_json(capsys, ["bearings", arc, "--remove", "CWRU drive end"])
    assert [r["label"] for r in d["bearings"]] == ["small"]
    # The model keeps its copy.
    assert run_json(capsys, ["model", arc, MACHINE])["model"]["bearings"][0]["geometry"] == geo
    assert "'small'" in run_fail(capsys, ["bearings", arc, "--remove", "nothing"])
    assert "--pitch-diameter" in run_fail(capsys, ["bearings", arc, "--add", "x",
                                                   "--elements", "9"])
    assert "pitch_diameter" in run_fail(capsys, ["bearings", arc, "--add", "x",
                                                 "--elements", "9", "--element-diameter",
                                                 "5", "--pitch-diameter", "4"])
    assert main(["bearings", arc]) == 0
    assert "BPFO" in capsys.readouterr().out


# -- diagnose -----------------------------------------------------------------------------
def latest_run(capsys, archive, point: str) -> dict:
    runs = run_json(capsys, ["runs", str(archive), "--point", point])["runs"]
    return max(runs, key=lambda r: r["taken"])


def test_diagnose_demo_runs(demo_archive_path, capsys):
    arc = str(demo_archive_path)
    run = latest_run(capsys, arc, P102_PUMP)
    d = run_json(capsys, ["diagnose", arc, run["run_id"]])
    assert d["findings_from"] == "stored results" and d["point"] == P102_PUMP
    assert d["shaft"] == "pump" and d["state"] == "danger"
    bearing = [f for f in d["findings"] if f["kind"] == "bearing"]
    assert bearing and "BPFO" in bearing[0]["title"]
    # First principles (Harris & Kotzalas): BPFO of the pump DE bearing at the pump's
    # speed; measured lines sit within 2 % of it (slip, Randall & Antoni 2011).
    bpfo_hz = defect_orders(BEARING_B).bpfo * d["rpm"] / 60.0
    first = [e for e in bearing[0]["evidence"] if e["source_name"] == "BPFO"]
    assert first and all(abs(e["frequency_hz"] / bpfo_hz - 1) < 0.02 for e in first)
    assert main(["diagnose", arc, run["run_id"]]) == 0
    table = capsys.readouterr().out
    for text in ("[serious]", "Bearing defect at BPFO", "recommendation:", "matched source",
                 "qualified person"):
        assert text in table
    run = latest_run(capsys, arc, P101_PUMP)
    d = run_json(capsys, ["diagnose", arc, run["run_id"]])
    assert d["findings"] and not [f for f in d["findings"] if f["kind"] == "bearing"]
    err = run_fail(capsys, ["diagnose", arc, run["run_id"], "--rpm", "1480"])
    assert "--rpm" in err and "FILE" in err
    assert "RUN_ID" in run_fail(capsys, ["diagnose", arc])


def test_diagnose_analyses_and_stores_when_needed(demo_archive_copy, tmp_path, capsys):
    arc = str(demo_archive_copy)
    run = latest_run(capsys, arc, P102_PUMP)
    stored = run_json(capsys, ["diagnose", arc, run["run_id"]])
    again = run_json(capsys, ["diagnose", arc, run["run_id"], "--recompute"])
    assert again["findings_from"] == "analysed now"
    assert again["findings"] == stored["findings"]  # the same analysis gives the same
    assert again["state"] == stored["state"] == "danger"  # the point was evaluated again
    # A run imported without analysis is analysed on the first diagnose, then stored.
    small = small_archive(tmp_path / "s.shaftwatch", fan_point=False)
    t = np.arange(int(FS * 2)) / FS
    x = 0.3 * np.sin(2 * np.pi * 1460 / 60 * t) \
        + 0.001 * np.random.default_rng(1).standard_normal(t.size)
    from engine.archive import open_archive

    with open_archive(small, mode="w") as a:
        rid = a.import_recording(Recording(fs_hz=FS, channels=[Channel(x, "g")], rpm=1460.0,
                                           source="tone.wav"),
                                 "Works/F-1/motor DE H").run_id
    first = run_json(capsys, ["diagnose", small, rid])
    assert first["findings_from"] == "analysed now"
    assert [f["kind"] for f in first["findings"]] == ["imbalance"]  # a pure 1× tone
    assert run_json(capsys, ["diagnose", small, rid])["findings_from"] == "stored results"


def test_diagnose_and_envelope_of_a_file_with_a_model_file(tmp_path, capsys):
    model = model_from_demo(next(m for m in PLANT.machines if m.tag == "P-102"))
    model_file = write(tmp_path / "p102.json", model.as_dict())
    wav = str(SAMPLES / "p102-pump-de-v-week15.wav")
    d = run_json(capsys, ["diagnose", wav, "--machine-file", model_file, "--shaft", "pump",
                          "--rpm", "1480", "--full-scale", "50", "--direction", "V",
                          "--location", "pump DE"])
    assert d["shaft"] == "pump" and d["reference_rpm"] == 1480
    bearing = [f for f in d["findings"] if f["kind"] == "bearing"]
    assert bearing and "BPFO" in bearing[0]["title"]
    bpfo_hz = defect_orders(BEARING_B).bpfo * 1480 / 60  # Harris & Kotzalas
    lines = [e["frequency_hz"] for e in bearing[0]["evidence"] if e["source_name"] == "BPFO"]
    assert lines and all(abs(f / bpfo_hz - 1) < 0.02 for f in lines)  # slip ≤ 2 %
    err = run_fail(capsys, ["diagnose", wav, "--machine-file", model_file, "--rpm", "1480",
                            "--full-scale", "50"])
    assert "--shaft" in err and "motor, pump" in err
    assert "--rpm" in run_fail(capsys, ["diagnose", wav, "--full-scale", "50"])
    assert "'fan'" in run_fail(capsys, ["diagnose", wav, "--machine-file", model_file,
                                        "--shaft", "fan", "--rpm", "1480"])
    # The envelope peaks of the same file get their source from the model's bearing on
    # the pump shaft when no geometry options are given.
    env = ["envelope", wav, "--full-scale", "50", "--machine-file", model_file, "--rpm",
           "1480", "--shaft", "pump"]
    e = run_json(capsys, env)
    assert e["labels"]["bearings"] == ["pump DE"]
    top = e["peaks"][0]
    assert top["source"] == "pump DE BPFO" == top["sources"][0]["name"]
    assert abs(top["frequency_hz"] / bpfo_hz - 1) < 0.02  # slip (Randall & Antoni 2011)
    assert "not both" in run_fail(capsys, env + ["--elements", "9", "--element-diameter",
                                                 "17.5", "--pitch-diameter", "80"])


# -- peak labels --------------------------------------------------------------------------
def test_spectrum_and_envelope_labels_of_an_archive_run(demo_archive_path, capsys):
    arc = str(demo_archive_path)
    run = latest_run(capsys, arc, P102_PUMP)
    argv = ["--archive", arc, "--run", run["run_id"]]
    d = run_json(capsys, ["spectrum", *argv, "--unit", "mm/s", "--peaks", "12"])
    assert d["labels"]["shaft"] == "pump" and d["labels"]["tolerance_pct"] == 1.0
    f1 = d["rpm"] / 60.0
    one = min(d["peaks"], key=lambda p: abs(p["frequency_hz"] - f1))
    # engine.kinematics names a shaft's orders "<shaft> 1×"; the point's shaft first.
    assert one["sources"][0]["name"] == "pump 1×"
    assert "motor 1×" in [s["name"] for s in one["sources"]]
    assert one["order"] == pytest.approx(1.0, abs=0.01)
    bpfo_hz = defect_orders(BEARING_B).bpfo * f1  # Harris & Kotzalas
    near = min(d["peaks"], key=lambda p: abs(p["frequency_hz"] - bpfo_hz))
    assert near["sources"][0]["name"] == "pump DE BPFO"
    for p in d["peaks"]:
        errors = [abs(s["error_hz"]) for s in p["sources"]]
        assert errors == sorted(errors)
        for s in p["sources"]:
            assert s["error_hz"] == pytest.approx(p["frequency_hz"] - s["frequency_hz"])
            assert abs(s["error_hz"]) <= max(0.01 * s["frequency_hz"], d["resolution_hz"])
    e = run_json(capsys, ["envelope", *argv])
    top = e["peaks"][0]
    assert top["source"] == "pump DE BPFO"
    assert abs(top["frequency_hz"] / bpfo_hz - 1) < 0.02  # slip (Randall & Antoni 2011)
    best = max(e["defects"], key=lambda m: m["snr_db"])
    assert best["name"] == "pump DE BPFO" and best["harmonics_found"] >= 2
    assert main(["spectrum", *argv, "--peaks", "5"]) == 0
    assert "pump DE BPFO" in capsys.readouterr().out


def tone_file(tmp_path, tones) -> str:
    t = np.arange(int(FS * 4)) / FS
    x = sum(a * np.sin(2 * np.pi * f * t + 0.3) for f, a in tones)
    x = x + 1e-4 * np.random.default_rng(7).standard_normal(t.size)
    path = tmp_path / "tones.wav"
    write_wav(path, Recording(fs_hz=FS, channels=[Channel(x, "g")], source=str(path)),
              bits=32, sample_format="float")
    return str(path)


def near(peaks, f_hz: float) -> dict:
    return min(peaks, key=lambda p: abs(p["frequency_hz"] - f_hz))


def test_spectrum_labels_with_a_model_file(tmp_path, capsys):
    model = {"version": 1, "shafts": [{"name": "motor", "ratio": 1.0},
                                      {"name": "output", "ratio": None}],
             "gears": [{"driver_shaft": "motor", "driven_shaft": "output",
                        "driver_teeth": 23, "driven_teeth": 67}],
             "line_frequency_hz": 50.0, "motor_shaft": "motor"}
    model_file = write(tmp_path / "gearbox.json", model)
    f_motor = 1480 / 60
    f_out = f_motor * 23 / 67          # first principles: driven = driver × z1/z2
    mesh = 23 * f_motor                # gear mesh = teeth × shaft speed (567.33 Hz)
    off = 100.0 * 1.015                # 1.5 % above 2× line: outside 1 %, inside 2 %
    wav = tone_file(tmp_path, [(f_motor, 0.2), (f_out, 0.1), (mesh, 0.5), (50.0, 0.05),
                               (off, 0.05)])
    base = ["spectrum", wav, "--machine-file", model_file, "--rpm", "1480", "--fmax", "1000",
            "--lines", "1600", "--peaks", "5"]
    d = run_json(capsys, base + ["--shaft", "output"])
    peaks = d["peaks"]
    assert near(peaks, f_motor)["sources"][0]["name"] == "motor 1×"
    assert near(peaks, f_out)["sources"][0]["name"] == "output 1×"
    assert near(peaks, f_out)["order"] == pytest.approx(1.0, abs=0.01)  # orders of --shaft
    top = near(peaks, mesh)["sources"][0]
    assert top["name"] == "gear mesh motor–output"
    assert top["frequency_hz"] == pytest.approx(mesh, rel=1e-12)
    assert near(peaks, 50.0)["sources"][0]["name"] == "line"
    assert near(peaks, off)["sources"] == []
    assert d["labels"]["shaft_rpm"] == pytest.approx(1480 * 23 / 67)
    d = run_json(capsys, base + ["--tolerance-pct", "2"])
    assert [s["name"] for s in near(d["peaks"], off)["sources"]] == ["2× line"]
    assert d["labels"]["shaft"] == "motor"  # the reference shaft when --shaft is not given
    assert "'shaft9'" in run_fail(capsys, base + ["--shaft", "shaft9"])
    assert "--rpm" in run_fail(capsys, ["spectrum", wav, "--machine-file", model_file])
    assert "--machine-file" in run_fail(capsys, ["spectrum", wav, "--shaft", "motor"])
    assert "from 0 to 50" in run_fail(capsys, base + ["--tolerance-pct", "80"])
    assert main(base) == 0
    out = capsys.readouterr().out
    assert "gear mesh motor–output" in out and "sources" in out


def test_envelope_geometry_of_an_archive_run_uses_the_points_shaft_speed(
        demo_archive_path, capsys):
    # F-201's fan turns at 890/1460 of the motor (belt drive): a fan bearing's BPFO is
    # BPFO orders × fan speed, not × the run's stored motor speed (Harris & Kotzalas).
    from engine.archive import open_archive
    from engine.bearings import defect_frequencies_hz

    fan = next(m for m in PLANT.machines if m.tag == "F-201")
    point = fan.point("fan DE H")
    with open_archive(demo_archive_path) as arc:
        row = arc.runs(f"Demo Works/F-201/{point.name}")[-1]
        ratio = arc.machine_model("Demo Works", "F-201").ratio("fan")
    g = point.bearing
    d = run_json(capsys, [
        "envelope", "--archive", str(demo_archive_path), "--run", row.run_id,
        "--elements", str(g.elements), "--element-diameter", str(g.element_diameter),
        "--pitch-diameter", str(g.pitch_diameter),
        "--contact-angle", str(g.contact_angle_deg)])
    bpfo = next(x for x in d["defects"] if x["name"].lower().endswith("bpfo"))
    expected = defect_frequencies_hz(g, row.rpm * ratio)["bpfo"]
    assert bpfo["frequency_hz"] == pytest.approx(expected, rel=1e-9)
    assert ratio < 0.7   # the fan is slower than the motor, so the check is not vacuous
