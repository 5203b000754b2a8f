"""Machine models, the bearing list and alarm plans kept in plant.h5 (setup_store)."""

import json
from dataclasses import replace

import h5py
import pytest

from engine.alarms.plan import AlarmPlan, Band
from engine.archive import create_archive, open_archive
from engine.bearings import BearingGeometry
from engine.demo_plant import PLANT
from engine.errors import ArchiveError, InputError
from engine.kinematics import BearingAt, MachineModel, Shaft, model_from_demo

SITE = "Demo Works"
FAN = next(m for m in PLANT.machines if m.tag == "F-201")
MODEL_PATH = f"sites/{SITE}/machines/F-201/model"


def fan_archive(path, *, shafts: bool = True):
    """An archive with the demo fan F-201 and its three points, open for writing."""
    arc = create_archive(path, plant_name="Setup test")
    arc.add_site(SITE)
    arc.add_machine(SITE, FAN.tag, name=FAN.name, nominal_rpm=FAN.nominal_rpm,
                    ratios={"motor": 1.0})
    for p in FAN.points:
        props = {"shaft": p.shaft} if shafts else {}
        arc.add_point(SITE, FAN.tag, p.name, location=p.location, direction=p.direction,
                      fmax_hz=1000.0, **props)
    return arc


def plan(name: str = "fan plan", high: float = 1.1) -> AlarmPlan:
    return AlarmPlan(name=name, bands=(
        Band(name="overall", measure="overall", alert=2.8, danger=4.5, unit="mm/s"),
        Band(name="1x", measure="band_rms", alert=1.0, danger=2.0, unit="mm/s", low=0.9,
             high=high, basis="order"),
    ))


def test_model_round_trip_through_open_and_close(tmp_path):
    model = model_from_demo(FAN)
    with fan_archive(tmp_path / "a.shaftwatch") as arc:
        assert arc.machine_model(SITE, FAN.tag) is None
        arc.set_machine_model(SITE, FAN.tag, model)
    with open_archive(tmp_path / "a.shaftwatch") as arc:
        back = arc.machine_model(SITE, FAN.tag)
        assert back == model and back.as_dict() == model.as_dict()
        # The machine's speed ratios follow the model's resolved ratios.
        assert arc.plant.machine(SITE, FAN.tag).ratios == pytest.approx(model.ratios)
        assert {p.name: arc.point_shaft(p.path) for p in arc.points()} == {
            p.name: p.shaft for p in FAN.points}
    # Any HDF5 and JSON reader sees the same document.
    with h5py.File(tmp_path / "a.shaftwatch" / "plant.h5", "r") as f:
        assert json.loads(f[MODEL_PATH].attrs["json"]) == model.as_dict()


def test_point_shaft_from_the_bearing_at_its_location(tmp_path):
    with fan_archive(tmp_path / "a.shaftwatch", shafts=False) as arc:
        point = f"{SITE}/F-201/fan DE H"
        assert arc.point_shaft(point) == ""  # no property, no model
        arc.set_machine_model(SITE, FAN.tag, model_from_demo(FAN))
        assert arc.point_shaft(point) == "fan"  # the model's bearing "fan DE"
        arc.update_point(point, shaft="motor")
        assert arc.point_shaft(point) == "motor"  # the property wins


def test_a_model_without_a_points_shaft_is_refused(tmp_path):
    folder = tmp_path / "a.shaftwatch"
    with fan_archive(folder) as arc:
        arc.set_machine_model(SITE, FAN.tag, model_from_demo(FAN))
        before = (folder / "plant.h5").read_bytes()
        with pytest.raises(InputError, match=r"point 'fan DE H' is on shaft 'fan'"):
            arc.set_machine_model(SITE, FAN.tag, MachineModel((Shaft("motor", 1.0),)))
        assert (folder / "plant.h5").read_bytes() == before
        assert arc.machine_model(SITE, FAN.tag) == model_from_demo(FAN)
        with pytest.raises(InputError, match="F-999"):
            arc.set_machine_model(SITE, "F-999", model_from_demo(FAN))


def test_a_point_on_a_shaft_the_model_lacks_is_refused(tmp_path):
    folder = tmp_path / "a.shaftwatch"
    with fan_archive(folder) as arc:
        arc.set_machine_model(SITE, FAN.tag, model_from_demo(FAN))
        before = (folder / "plant.h5").read_bytes()
        with pytest.raises(InputError, match=r"shaft 'pump' is not one of"):
            arc.update_point(f"{SITE}/F-201/fan DE H", shaft="pump")
        with pytest.raises(InputError, match=r"shaft 'pump' is not one of"):
            arc.add_point(SITE, FAN.tag, "extra", shaft="pump")
        assert (folder / "plant.h5").read_bytes() == before
        arc.add_point(SITE, FAN.tag, "fan NDE H", shaft="fan")   # a shaft it has
        assert arc.point_shaft(f"{SITE}/F-201/fan NDE H") == "fan"


def test_bearing_list_round_trip(tmp_path):
    a = BearingGeometry("drive end", 9, 0.3126, 1.537, unit="in")
    b = BearingGeometry("fan", 11, 19.8, 104.0, 15.0)
    with fan_archive(tmp_path / "a.shaftwatch") as arc:
        assert arc.bearing_library() == []
        arc.add_bearing(a)
        arc.add_bearing(b)
        with pytest.raises(InputError, match="already has 'fan'"):
            arc.add_bearing(replace(b, elements=12))
    with open_archive(tmp_path / "a.shaftwatch", mode="w") as arc:
        assert arc.bearing_library() == [a, b]  # in the order they were added
        assert arc.bearing("fan") == b
        arc.add_bearing(replace(b, elements=12), replace=True)
        assert [x.elements for x in arc.bearing_library()] == [9, 12]
        arc.remove_bearing("drive end")
        with pytest.raises(InputError, match="'fan'"):  # the message lists what exists
            arc.remove_bearing("drive end")
    with open_archive(tmp_path / "a.shaftwatch") as arc:
        assert arc.bearing_library() == [replace(b, elements=12)]
        with pytest.raises(ArchiveError, match="opened for reading"):
            arc.add_bearing(a)


def test_plans_round_trip_and_clear(tmp_path):
    p1, p2 = f"{SITE}/F-201/fan DE H", f"{SITE}/F-201/motor DE H"
    with fan_archive(tmp_path / "a.shaftwatch") as arc:
        assert arc.plan(p1) is None
        arc.set_plan(p1, plan())
        arc.set_plans({p2: plan("motor plan"), p1: plan("fan plan 2")})
    with open_archive(tmp_path / "a.shaftwatch", mode="w") as arc:
        assert arc.plan(p1) == plan("fan plan 2") and arc.plan(p2) == plan("motor plan")
        assert arc.plan(p1).digest() == plan("fan plan 2").digest()
        arc.clear_plan(p2)
    with open_archive(tmp_path / "a.shaftwatch") as arc:
        assert arc.plan(p2) is None and arc.plan(p1) == plan("fan plan 2")


def test_set_plan_validation_names_the_band(tmp_path):
    folder = tmp_path / "a.shaftwatch"
    point = f"{SITE}/F-201/fan DE H"
    with fan_archive(folder) as arc:
        arc.set_plan(point, plan())
        before = (folder / "plant.h5").read_bytes()
        too_high = AlarmPlan(name="bad", bands=(
            Band(name="mesh zone", measure="band_rms", alert=1.0, danger=2.0,
                 unit="mm/s", low=900.0, high=1500.0),))  # above the point's 1000 Hz Fmax
        with pytest.raises(InputError, match="mesh zone"):
            arc.set_plan(point, too_high)
        wrong_levels = AlarmPlan(name="bad", bands=(
            Band(name="overall", measure="overall", alert=5.0, danger=2.0, unit="mm/s"),))
        with pytest.raises(InputError, match="overall"):
            arc.set_plans({f"{SITE}/F-201/motor DE H": plan(), point: wrong_levels})
        assert (folder / "plant.h5").read_bytes() == before  # nothing stored
        assert arc.plan(point) == plan()
        assert arc.plan(f"{SITE}/F-201/motor DE H") is None


def test_a_reader_sees_a_writers_edits_after_reload(tmp_path):
    folder = tmp_path / "a.shaftwatch"
    fan_archive(folder).close()
    reader = open_archive(folder)
    try:
        with open_archive(folder, mode="w") as writer:
            writer.add_machine(SITE, "F-202", ratios={"motor": 1.0})
            writer.set_machine_model(SITE, "F-202", MachineModel(
                (Shaft("motor", 1.0),),
                bearings=(BearingAt("motor", BearingGeometry("m", 8, 7.9, 39.0), "motor DE"),)))
            writer.add_bearing(BearingGeometry("m", 8, 7.9, 39.0))
            writer.set_plan(f"{SITE}/F-201/fan DE H", plan())
        with pytest.raises(InputError, match="F-202"):
            reader.machine_model(SITE, "F-202")  # the reader's tree is as it was opened
        reader.reload()
        assert reader.machine_model(SITE, "F-202").bearings[0].label == "motor DE"
        assert [b.label for b in reader.bearing_library()] == ["m"]
        assert reader.plan(f"{SITE}/F-201/fan DE H") == plan()
    finally:
        reader.close()


def test_plant_prev_keeps_the_previous_version(tmp_path):
    folder = tmp_path / "a.shaftwatch"
    first = model_from_demo(FAN)
    second = MachineModel((Shaft("motor", 1.0), Shaft("fan", 0.61)))
    with fan_archive(folder) as arc:
        arc.set_machine_model(SITE, FAN.tag, first)
        arc.set_machine_model(SITE, FAN.tag, second)
    with h5py.File(folder / "plant.h5.prev", "r") as f:
        assert MachineModel.from_dict(json.loads(f[MODEL_PATH].attrs["json"])) == first
    with h5py.File(folder / "plant.h5", "r") as f:
        assert MachineModel.from_dict(json.loads(f[MODEL_PATH].attrs["json"])) == second
    # With plant.h5 lost, the archive opens on .prev: the model before the last edit.
    (folder / "plant.h5").unlink()
    with pytest.warns(Warning, match="plant.h5.prev"):
        arc = open_archive(folder)
    with arc:
        assert arc.machine_model(SITE, FAN.tag) == first
