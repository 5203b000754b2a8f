"""Machine kinematics: ratios, source frequencies and peak labels from first principles."""

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from engine.bearings import (BearingGeometry, defect_frequencies_hz, defect_markers,
                             defect_orders)
from engine.demo_plant import (BELT_ORDER, FAN_BLADES, FAN_RATIO, OUTPUT_RATIO, PLANT,
                               PUMP_VANES)
from engine.errors import InputError
from engine.kinematics import (BearingAt, BeltDrive, BladeRow, GearPair, MachineModel, Shaft,
                               Source, label_peaks, model_from_demo, sources)
from engine.peaks import Peak, find_peaks
from engine.simulate import MachineSignal, synthesize
from engine.spectrum import SpectrumSettings, compute_spectrum

# Case Western Reserve University Bearing Data Center: the drive-end bearing of the rig
# (9 balls of 0.3126 in on a 1.537 in pitch circle) and its published BPFO multiple.
CWRU_DRIVE_END = BearingGeometry("drive end", 9, 0.3126, 1.537, unit="in")
CWRU_BPFO_ORDER = 3.5848


def gearbox(**extra) -> MachineModel:
    return MachineModel((Shaft("input", 1.0), Shaft("output")),
                        gears=(GearPair("input", "output", 23, 67),), **extra)


def named(source_list, name: str) -> Source:
    hits = [s for s in source_list if s.name == name]
    assert len(hits) == 1, (name, [s.name for s in source_list])
    return hits[0]


def test_gear_mesh_of_a_23_tooth_pinion_at_1480_rpm():
    # First principles: mesh = teeth × shaft speed = 23 × 1480 / 60 = 567.33 Hz, the same
    # from the wheel's side (67 teeth at 1480 · 23/67 rpm); sidebands sit ± the shaft rates.
    model = gearbox()
    assert model.ratio("output") == pytest.approx(23 / 67, rel=1e-15)
    src = sources(model, 1480.0, harmonics=2)
    mesh = named(src, "gear mesh input–output")
    assert mesh.frequency_hz == pytest.approx(567.3333333, abs=1e-6)
    assert mesh.frequency_hz == pytest.approx(67 * 1480 * 23 / 67 / 60, rel=1e-12)
    assert mesh.kind == "gear_mesh" and mesh.order_of_reference == pytest.approx(23.0)
    assert named(src, "2×gear mesh input–output").frequency_hz == pytest.approx(2 * 567.33333)
    f_in, f_out = 1480 / 60, 1480 / 60 * 23 / 67
    for name, expected in (("−1× input", -f_in), ("+2× input", 2 * f_in),
                           ("−2× output", -2 * f_out), ("+1× output", f_out)):
        s = named(src, f"gear mesh input–output {name}")
        assert s.kind == "sideband" and s.family == "gear mesh"
        assert s.frequency_hz == pytest.approx(567.33333 + expected, abs=1e-4)


@given(driver=st.integers(5, 200), driven=st.integers(5, 200), rpm=st.floats(60.0, 6000.0))
def test_both_gears_mesh_at_the_same_frequency(driver, driven, rpm):
    # First principles: the teeth passing the mesh per second are the same on both gears.
    model = MachineModel((Shaft("a", 1.0), Shaft("b")),
                         gears=(GearPair("a", "b", driver, driven),))
    mesh = [s for s in sources(model, rpm, harmonics=1) if s.kind == "gear_mesh"][0]
    f_b = model.ratio("b") * rpm / 60
    assert mesh.frequency_hz == pytest.approx(driven * f_b, rel=1e-12)
    assert mesh.frequency_hz == pytest.approx(driver * rpm / 60, rel=1e-12)


def test_belt_ratio_and_belt_frequency_from_diameters():
    # First principles: without creep the belt's surface speed π·d·n is the same at both
    # pulleys, so n_fan = n_motor · d_motor / d_fan, and a belt of length L passes a point
    # π·d·n/L times a second.
    model = MachineModel((Shaft("motor", 1.0), Shaft("fan")),
                         belts=(BeltDrive("motor", "fan", 180.0, 300.0, 2400.0),))
    assert model.ratio("fan") == pytest.approx(0.6, rel=1e-15)
    src = sources(model, 1460.0)
    assert named(src, "fan 1×").frequency_hz == pytest.approx(1460 / 60 * 0.6)
    belt = named(src, "belt motor–fan")
    assert belt.kind == "belt"
    assert belt.frequency_hz == pytest.approx(math.pi * 180.0 * (1460 / 60) / 2400.0, rel=1e-12)
    assert named(src, "2×belt motor–fan").frequency_hz == pytest.approx(2 * belt.frequency_hz)


def test_a_given_ratio_is_kept_and_a_driver_ratio_is_found_backwards():
    # First principles: the driver turns at driven · d_driven / d_driver.
    model = MachineModel((Shaft("motor"), Shaft("fan", 0.5)),
                         belts=(BeltDrive("motor", "fan", 100.0, 200.0),))
    assert model.ratios == {"motor": pytest.approx(1.0), "fan": 0.5}


def test_bearing_sources_equal_engine_bearings():
    model = MachineModel((Shaft("motor", 1.0),),
                         bearings=(BearingAt("motor", CWRU_DRIVE_END, "DE"),))
    rpm = 1797.0
    src = sources(model, rpm, harmonics=3)
    hz = defect_frequencies_hz(CWRU_DRIVE_END, rpm)
    # CWRU Bearing Data Center table: BPFO = 3.5848 × shaft speed.
    assert named(src, "DE BPFO").frequency_hz == pytest.approx(CWRU_BPFO_ORDER * rpm / 60,
                                                              rel=1e-4)
    for family, key in (("FTF", "ftf"), ("BSF", "bsf"), ("BPFO", "bpfo"), ("BPFI", "bpfi")):
        for h in (1, 2, 3):
            label = family if h == 1 else f"{h}×{family}"
            s = named(src, f"DE {label}")
            assert s.kind == "bearing" and s.family == family and s.shaft == "motor"
            assert s.frequency_hz == pytest.approx(h * hz[key], rel=1e-12)
    markers = defect_markers(CWRU_DRIVE_END, rpm / 60, harmonics=3, sidebands=2)
    mine = sorted((s.frequency_hz, s.name) for s in src if s.name.startswith("DE "))
    assert mine == sorted((m.frequency_hz, f"DE {m.label}") for m in markers)


def test_shaft_orders_and_subharmonic():
    src = sources(MachineModel((Shaft("pump", 1.0),)), 1500.0, harmonics=4)
    orders = [s for s in src if s.kind == "order"]
    assert [(s.name, s.family) for s in orders] == [
        ("pump 0.5×", "subharmonic"), ("pump 1×", "running speed"), ("pump 2×", "running speed"),
        ("pump 3×", "running speed"), ("pump 4×", "running speed")]
    assert [s.frequency_hz for s in orders] == pytest.approx([12.5, 25.0, 50.0, 75.0, 100.0])


def test_blade_pass_is_count_times_shaft_speed():
    model = MachineModel((Shaft("motor", 1.0), Shaft("fan", 0.6)),
                         blades=(BladeRow("fan", 8),))
    src = sources(model, 1500.0)
    # First principles: 8 blades pass a point 8 times a fan revolution (15 Hz).
    assert named(src, "blade pass fan").frequency_hz == pytest.approx(8 * 15.0)
    assert named(src, "3×blade pass fan").frequency_hz == pytest.approx(3 * 8 * 15.0)


def test_line_frequency_and_twice_line_for_a_50_hz_motor():
    # First principles: magnetic pull peaks twice per supply cycle, 2 × 50 = 100 Hz; a
    # 4-pole motor on 50 Hz turns synchronously at 120·50/4 = 1500 rpm, so at 1480 rpm
    # the slip is 20 rpm = 1/3 Hz and the pole pass 4 × 1/3 = 4/3 Hz.
    model = MachineModel((Shaft("motor", 1.0),), line_frequency_hz=50.0,
                         motor_shaft="motor", poles=4)
    src = sources(model, 1480.0)
    assert named(src, "line").frequency_hz == 50.0
    assert named(src, "2× line").frequency_hz == 100.0
    assert named(src, "2× line").kind == "line"
    assert named(src, "pole pass").frequency_hz == pytest.approx(4 / 3, rel=1e-12)
    assert named(src, "motor 1× +pole pass").frequency_hz == pytest.approx(1480 / 60 + 4 / 3)
    assert [s.frequency_hz for s in src] == sorted(s.frequency_hz for s in src)


def test_label_peaks_lists_matches_closest_first():
    def src(name, f):
        return Source(name, f, "order", "x", f / 10.0, "running speed")

    pool = [src("a", 100.0), src("b", 100.6), src("c", 99.7), src("far", 110.0)]
    peak = Peak(frequency_hz=100.2, amplitude=1.0, line=160, prominence_db=20.0)
    (labelled,) = label_peaks([peak], pool, tolerance_pct=1.0)
    assert [s.name for s, _ in labelled.matches] == ["a", "b", "c"]
    assert [e for _, e in labelled.matches] == pytest.approx([0.2, -0.4, 0.5])
    assert labelled.best.name == "a"
    (wide,) = label_peaks([peak], pool, tolerance_hz=10.0)
    assert [s.name for s, _ in wide.matches] == ["a", "b", "c", "far"]
    (none,) = label_peaks([replace(peak, frequency_hz=500.0)], pool)
    assert none.matches == [] and none.best is None
    json.dumps(labelled.as_dict())


def test_peaks_of_a_simulated_pump_are_labelled_with_their_sources():
    model = model_from_demo(PLANT.machine("P-101"))
    rpm, fs = 1480.0, 12800.0
    sig = MachineSignal(rpm=rpm, orders={1.0: (0.02, 0.0), float(PUMP_VANES): (0.05, 1.0)},
                        fixed_tones_hz={100.0: 0.01}, noise_g_rms=0.001, seed=3)
    x = synthesize(sig, fs_hz=fs, duration_s=4.0).channels[0].samples
    spec = compute_spectrum(x, fs, settings=SpectrumSettings(fmax_hz=1000.0, lines=1600))
    peaks = find_peaks(spec, count=3)
    labels = label_peaks(peaks, sources(model, rpm), tolerance_hz=spec.resolution_hz)
    best = {round(lp.peak.frequency_hz): lp.best.name for lp in labels}
    assert best[123] == "blade pass pump"        # 5 vanes × 24.67 Hz
    assert best[100] == "2× line"
    assert best[25] in ("motor 1×", "pump 1×")   # the two shafts turn together


@pytest.mark.parametrize("machine", PLANT.machines, ids=lambda m: m.tag)
def test_as_dict_from_dict_round_trip(machine):
    model = model_from_demo(machine)
    text = json.dumps(model.as_dict())
    again = MachineModel.from_dict(json.loads(text))
    assert again == model
    assert sources(again, machine.nominal_rpm) == sources(model, machine.nominal_rpm)


def test_model_from_demo_carries_the_demo_kinematics():
    gears = model_from_demo(PLANT.machine("G-401"))
    assert gears.ratio("output") == pytest.approx(OUTPUT_RATIO, rel=1e-12)
    assert gears.gears == (GearPair("input", "output", 23, 67),)
    fan = model_from_demo(PLANT.machine("F-201"))
    assert fan.ratio("fan") == pytest.approx(FAN_RATIO, rel=1e-12)
    belt = named(sources(fan, 1460.0), "belt motor–fan")
    assert belt.order_of_reference == pytest.approx(BELT_ORDER, rel=1e-12)
    assert fan.blades == (BladeRow("fan", FAN_BLADES),)
    assert {(b.shaft, b.label) for b in fan.bearings} == {("motor", "motor DE"),
                                                          ("fan", "fan DE"), ("fan", "fan NDE")}
    assert model_from_demo(PLANT.machine("B-301")).poles == 2
    with pytest.raises(InputError, match="DemoMachine"):
        model_from_demo("F-201")


GOOD = {"shafts": [{"name": "motor", "ratio": 1.0}, {"name": "out", "ratio": None}],
        "gears": [{"driver_shaft": "motor", "driven_shaft": "out", "driver_teeth": 20,
                   "driven_teeth": 40}]}


def changed(path, value):
    data = json.loads(json.dumps(GOOD))
    part, index, key = path
    data[part][index][key] = value
    return data


@pytest.mark.parametrize("data, field", [
    (changed(("shafts", 0, "ratio"), -1.0), "shafts[0].ratio"),
    (changed(("shafts", 1, "name"), ""), "shafts[1].name"),
    (changed(("gears", 0, "driver_teeth"), 0), "gears[0].driver_teeth"),
    (changed(("gears", 0, "driven_teeth"), 2.5), "gears[0].driven_teeth"),
    (changed(("gears", 0, "driven_shaft"), "nowhere"), "gears[0].driven_shaft"),
    (changed(("gears", 0, "driven_shaft"), "motor"), "gears[0].driven_shaft"),
    (changed(("shafts", 1, "ratio"), 0.9), "gears[0]"),
    ({**GOOD, "gears": []}, "shafts[1].ratio"),
    ({**GOOD, "poles": 3, "line_frequency_hz": 50.0, "motor_shaft": "motor"}, "poles"),
    ({**GOOD, "poles": 4}, "poles"),
    ({**GOOD, "line_frequency_hz": -50.0}, "line_frequency_hz"),
    ({**GOOD, "motor_shaft": "rotor"}, "motor_shaft"),
    ({**GOOD, "blades": [{"shaft": "out", "count": 0}]}, "blades[0].count"),
    ({**GOOD, "belts": [{"driver_shaft": "motor", "driven_shaft": "out", "driver_diameter": 100,
                         "driven_diameter": 200, "belt_length": 100}]}, "belts[0].belt_length"),
    ({**GOOD, "bearings": [{"shaft": "out", "label": "x", "geometry": {
        "label": "g", "elements": 2, "element_diameter": 1.0, "pitch_diameter": 5.0}}]},
     "bearings[0].geometry"),
    ({**GOOD, "shafts": [{"name": "motor", "ratio": 1.0, "speed": 3}]}, "shafts[0]"),
    ({**GOOD, "gears": [{"driver_shaft": "motor", "driven_shaft": "out"}]},
     "gears[0].driver_teeth is missing"),
    ({**GOOD, "colour": "red"}, "colour"),
    ({**GOOD, "shafts": [{"name": "a", "ratio": 1.0}, {"name": "a", "ratio": 2.0}]},
     "shafts[1].name"),
])
def test_invalid_models_raise_input_error_naming_the_field(data, field):
    with pytest.raises(InputError) as err:
        MachineModel.from_dict(data, source="plant.json")
    assert str(err.value).startswith("plant.json: machine model")
    assert field in str(err.value)


def test_parts_check_their_own_fields():
    with pytest.raises(InputError, match=r"GearPair\.driver_teeth"):
        GearPair("a", "b", 0, 5)
    with pytest.raises(InputError, match=r"BeltDrive\.driven_diameter"):
        BeltDrive("a", "b", 100.0, float("nan"))
    with pytest.raises(InputError, match=r"BearingAt\.geometry"):
        BearingAt("a", {"elements": 9}, "DE")
    with pytest.raises(InputError, match="shafts"):
        MachineModel(())
    with pytest.raises(InputError, match="harmonics"):
        sources(gearbox(), 1480.0, harmonics=0)
    with pytest.raises(InputError, match="reference_rpm"):
        sources(gearbox(), -5.0)
    with pytest.raises(InputError, match="tolerance_pct"):
        label_peaks([], [], tolerance_pct=-1.0)


def test_bearing_orders_scale_with_the_shaft_the_bearing_is_on():
    # First principles: a bearing turns with its shaft, so its defect lines scale with
    # that shaft's ratio (here the gearbox output at 23/67 of the input).
    geo = BearingGeometry("out", 10, 11.1, 58.5)
    model = gearbox(bearings=(BearingAt("output", geo, "out"),))
    bpfo = named(sources(model, 1480.0), "out BPFO")
    assert bpfo.frequency_hz == pytest.approx(defect_orders(geo).bpfo * 1480 / 60 * 23 / 67)
    assert np.isclose(bpfo.order_of_reference, defect_orders(geo).bpfo * 23 / 67)
