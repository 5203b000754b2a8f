"""Alarm plans: validation messages, band edges, the plan file (JSON and TOML)."""

import dataclasses
import json
import math
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.alarms.plan import (BAND_FIELDS, FILE_FORMAT, MEASURES, AlarmPlan, Band,
                                plan_to_toml, read_plan_file, write_plan_file)
from engine.errors import InputError


def sample_plan() -> AlarmPlan:
    return AlarmPlan(
        name="P-101 motor DE",
        bands=(
            Band("overall velocity", "overall", alert=2.8, danger=4.5),
            Band("1x", "band_rms", alert=2.0, danger=4.0, low=0.8, high=1.2, basis="order"),
            Band("high band", "band_peak", alert=0.5, danger=1.0, unit="g", scale="peak",
                 low=1000.0, high=5000.0),
            Band("envelope", "envelope_rms", alert=0.05, danger=0.1, unit="g", low=5.0,
                 high=400.0),
            Band("envelope BPFO", "defect", alert=0.02, danger=0.05, unit="g", scale="peak",
                 defect="bpfo"),
            Band("crest factor", "crest_factor", alert=5.0, danger=7.0, unit="1", scale=""),
            Band("kurtosis", "kurtosis", alert=4.0, danger=8.0, unit="1", scale=""),
        ),
        origin="user", note="Demo Works pump, drive end\nsecond line")


def test_band_fields_match_the_dataclass():
    assert BAND_FIELDS == tuple(f.name for f in dataclasses.fields(Band))


def test_sample_plan_validates_and_covers_every_measure():
    plan = sample_plan()
    plan.validate(fmax_hz=5000.0, rpm=1480.0, envelope_fmax_hz=500.0)
    assert set(MEASURES) - {b.measure for b in plan.bands} == {"envelope_peak"}
    assert plan.band("1x").low == 0.8
    with pytest.raises(InputError, match="no band 'nope'"):
        plan.band("nope")


def test_order_band_edges_follow_speed():
    b = Band("1x", "band_rms", 1.0, 2.0, low=0.8, high=1.2, basis="order")
    # 1480 rpm = 24.667 Hz shaft rate (first principles: rpm / 60).
    assert b.edges_hz(1480.0) == pytest.approx((0.8 * 1480 / 60, 1.2 * 1480 / 60))
    assert b.edges_hz(3000.0) == pytest.approx((40.0, 60.0))
    assert b.edges_hz(math.nan) is None
    assert b.edges_hz(None) is None
    assert Band("f", "band_rms", 1, 2, low=10, high=20).edges_hz(math.nan) == (10.0, 20.0)


def test_overall_without_edges_uses_the_iso_broadband_range():
    # ISO 20816-1 broadband: 10–1000 Hz above 600 rpm, 2–1000 Hz at 120–600 rpm
    # (from memory of the standard's text).
    b = Band("overall velocity", "overall", 2.8, 4.5)
    assert b.edges_hz(1480.0) == (10.0, 1000.0)
    assert b.edges_hz(math.nan) == (10.0, 1000.0)
    assert b.edges_hz(300.0) == (2.0, 1000.0)
    assert Band("d", "defect", 1, 2, unit="g", defect="bpfo").edges_hz(1480) is None


BAD_BANDS = [
    (Band("b", "band_rms", 1, 2, low=100, high=50), "band 'b': low 100 must be below high 50"),
    (Band("b", "band_rms", 1, 2, low=100, high=100), "band 'b': low 100 must be below high"),
    (Band("b", "band_rms", 5, 4, low=1, high=2), "band 'b': alert 5 must be below danger 4"),
    (Band("b", "band_rms", 4, 4, low=1, high=2), "band 'b': alert 4 must be below danger 4"),
    (Band("b", "band_rms", -1, 4, low=1, high=2), "band 'b': alert must be a positive"),
    (Band("b", "band_rms", math.nan, 4, low=1, high=2), "band 'b': alert must be a positive"),
    (Band("b", "band_rms", 1, math.inf, low=1, high=2), "band 'b': danger must be a positive"),
    (Band("b", "overall", 1, 2, unit="g"), "band 'b': unit 'g' .* does not fit measure overall"),
    (Band("b", "envelope_rms", 1, 2, unit="mm/s"), "band 'b': unit 'mm/s' .* does not fit"),
    (Band("b", "crest_factor", 4, 6), "band 'b': unit 'mm/s' does not fit measure crest_factor"),
    (Band("b", "kurtosis", 4, 6, unit="1"), "band 'b': scale 'rms' does not fit measure"),
    (Band("b", "band_rms", 1, 2, unit="1", low=1, high=2), "band 'b': unit \"1\" is only"),
    (Band("b", "band_rms", 1, 2, unit="V", low=1, high=2), "band 'b': unit 'V' .* does not fit"),
    (Band("b", "band_rms", 1, 2, unit="furlong", low=1, high=2), "band 'b': unit 'furlong'"),
    (Band("b", "band_rms", 1, 2, scale="psd", low=1, high=2), "band 'b': scale 'psd' is not"),
    (Band("b", "band_rms", 1, 2), "band 'b': measure band_rms needs band edges"),
    (Band("b", "band_rms", 1, 2, low=1), "band 'b': high is missing"),
    (Band("b", "band_rms", 1, 2, low=-1, high=2), "band 'b': low must be a number ≥ 0"),
    (Band("b", "crest_factor", 4, 6, unit="1", scale="", low=1, high=2),
     "band 'b': low/high are not used by measure crest_factor"),
    (Band("b", "rms", 1, 2), "band 'b': measure 'rms' is not known"),
    (Band("b", "band_rms", 1, 2, low=1, high=2, basis="rpm"), "band 'b': basis 'rpm' is not"),
    (Band("b", "defect", 1, 2, unit="g", defect="bpfx"), "band 'b': defect 'bpfx' is not known"),
    (Band("b", "defect", 1, 2, unit="g"), "band 'b': defect '' is not known"),
    (Band("b", "band_rms", 1, 2, low=1, high=2, defect="bpfo"), "band 'b': defect 'bpfo' is only"),
    (Band("", "band_rms", 1, 2, low=1, high=2), "a band has no name"),
]


@pytest.mark.parametrize("band, message", BAD_BANDS)
def test_bad_band_is_refused_naming_band_and_field(band, message):
    plan = AlarmPlan("p", (band,))
    with pytest.raises(InputError, match=f"^site.json: {message}"):
        plan.validate(source="site.json")


def test_duplicate_names_and_empty_plans_are_refused():
    b = Band("1x", "band_rms", 1, 2, low=10, high=20)
    with pytest.raises(InputError, match="band '1x': name is used by more than one band"):
        AlarmPlan("p", (b, dataclasses.replace(b, low=30, high=40))).validate()
    with pytest.raises(InputError, match="has no bands"):
        AlarmPlan("p", ()).validate()
    with pytest.raises(InputError, match="name must be a non-empty text"):
        AlarmPlan(" ", (b,)).validate()


def test_fmax_check_for_hz_and_order_bands():
    hz = AlarmPlan("p", (Band("hi", "band_rms", 1, 2, low=500, high=1200),))
    with pytest.raises(InputError, match="band 'hi': high 1200 Hz is above the Fmax of 1000 Hz"):
        hz.validate(fmax_hz=1000.0)
    hz.validate(fmax_hz=1200.0)
    orders = AlarmPlan("p", (Band("10x", "band_rms", 1, 2, low=9.5, high=10.5, basis="order"),))
    orders.validate(fmax_hz=1000.0)  # speed unknown: checked when measured
    orders.validate(fmax_hz=1000.0, rpm=1480.0)  # 10.5 × 24.67 Hz = 259 Hz
    with pytest.raises(InputError, match=r"band '10x': high 10.5 orders \(1050 Hz at 6000 rpm\)"
                                         r" is above the Fmax of 1000 Hz"):
        orders.validate(fmax_hz=1000.0, rpm=6000.0)
    env = AlarmPlan("p", (Band("env", "envelope_peak", 1, 2, unit="g", low=10, high=800),))
    env.validate(fmax_hz=1000.0)  # envelope bands are checked against the envelope Fmax
    with pytest.raises(InputError, match="band 'env': high 800 Hz is above the envelope Fmax"):
        env.validate(envelope_fmax_hz=500.0)


def test_digest_is_stable_and_sees_every_change():
    plan = sample_plan()
    d = plan.digest()
    assert len(d) == 16 and int(d, 16) >= 0
    assert AlarmPlan.from_dict(json.loads(json.dumps(plan.as_dict()))).digest() == d
    # an int level and the same float level are the same plan
    b0 = plan.bands[0]
    same = dataclasses.replace(plan, bands=(dataclasses.replace(b0, alert=2.8),) + plan.bands[1:])
    assert same.digest() == d
    changed = dataclasses.replace(plan, bands=(dataclasses.replace(b0, alert=2.9),)
                                  + plan.bands[1:])
    assert changed.digest() != d
    ints = AlarmPlan("p", (Band("b", "band_rms", 1, 2, low=10, high=20),))
    floats = AlarmPlan("p", (Band("b", "band_rms", 1.0, 2.0, low=10.0, high=20.0),))
    assert ints.digest() == floats.digest()


@pytest.mark.parametrize("suffix", [".json", ".toml"])
def test_plan_file_round_trip(tmp_path, suffix):
    plan = sample_plan()
    path = tmp_path / f"plant{suffix}"
    write_plan_file(plan, path)
    back = read_plan_file(path)
    assert back == plan
    assert back.digest() == plan.digest()


def test_json_file_layout(tmp_path):
    path = tmp_path / "plan.json"
    write_plan_file(sample_plan(), path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format"] == FILE_FORMAT and doc["version"] == 1
    assert doc["plan"]["bands"][0] == {"name": "overall velocity", "measure": "overall",
                                       "alert": 2.8, "danger": 4.5, "unit": "mm/s",
                                       "scale": "rms", "low": None, "high": None,
                                       "basis": "hz", "defect": ""}


def test_hand_written_toml_and_defaults(tmp_path):
    path = tmp_path / "fan.toml"
    path.write_text('format = "shaftwatch-alarm-plan"\nversion = 1\n\n[plan]\n'
                    'name = "F-201 fan"\n\n[[plan.bands]]\nname = "fan 1x"\n'
                    'measure = "band_rms"\nlow = 0.8\nhigh = 1.2\nbasis = "order"\n'
                    'alert = 3\ndanger = 6\nunit = "ips"\n', encoding="utf-8")
    plan = read_plan_file(path)
    assert plan.origin == "file fan.toml"  # no origin in the file
    b = plan.band("fan 1x")
    assert (b.unit, b.scale, b.alert, b.danger) == ("in/s", "rms", 3.0, 6.0)


def test_toml_text_is_readable_by_tomllib_with_odd_characters():
    import tomllib
    plan = AlarmPlan('quote " back \\ del \x7f tab \t é', (Band("b", "band_rms", 1e-5, 1e16,
                                                               low=0, high=2),))
    doc = tomllib.loads(plan_to_toml(plan))
    assert AlarmPlan.from_dict(doc["plan"]) == plan


BAD_FILES = [
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1,\n "plan": {',
     "not valid JSON at line 2"),
    ("plan.json", '[1, 2]', "holds an object with format"),
    ("plan.json", '{"format": "other", "version": 1, "plan": {}}', "format must be"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 7, "plan": {}}',
     "version 7 is not readable"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": []}',
     "the plan must be a table/object"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "p", '
                  '"bands": [{"name": "1x", "measure": "band_rms", "low": 30, "high": 20, '
                  '"alert": 1, "danger": 2}]}}', "band '1x': low 30 must be below high 20"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "p", '
                  '"bands": [{"name": "1x", "measure": "band_rms", "lo": 30, "high": 20, '
                  '"alert": 1, "danger": 2}]}}', "band '1x': unknown field 'lo'"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "p", '
                  '"bands": [{"measure": "band_rms", "alert": 1, "danger": 2}]}}',
     "band #1: name is missing"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "p", '
                  '"bands": [{"name": "a", "measure": "overall", "alert": "4", "danger": 2}]}}',
     "band 'a': alert must be a number"),
    ("plan.json", '{"format": "shaftwatch-alarm-plan", "version": 1, "plan": {"name": "p", '
                  '"bands": [{"name": "a", "measure": "overall", "alert": 4, "danger": 2}]}}',
     "band 'a': alert 4 must be below danger 2"),
    ("plan.toml", 'format = "shaftwatch-alarm-plan"\nversion = \n', "not valid TOML"),
]


@pytest.mark.parametrize("name, text, message", BAD_FILES)
def test_bad_file_names_the_file_and_the_problem(tmp_path, name, text, message):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=message) as info:
        read_plan_file(path)
    assert str(info.value).startswith(str(path))


def test_missing_and_binary_files(tmp_path):
    with pytest.raises(InputError, match="missing.json: cannot read the alarm plan file"):
        read_plan_file(tmp_path / "missing.json")
    bad = tmp_path / "bin.json"
    bad.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(InputError, match="bin.json: not UTF-8 text"):
        read_plan_file(bad)


def test_a_refused_write_leaves_the_old_file(tmp_path):
    path = tmp_path / "plan.json"
    write_plan_file(sample_plan(), path)
    before = path.read_bytes()
    bad = AlarmPlan("p", (Band("b", "band_rms", 5, 4, low=1, high=2),))
    with pytest.raises(InputError, match="plan.json: band 'b': alert 5 must be below"):
        write_plan_file(bad, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.json"]
    with pytest.raises(InputError, match="cannot write the alarm plan file"):
        write_plan_file(sample_plan(), tmp_path / "no such folder" / "plan.json")


_names = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=12).filter(
    lambda s: s.strip())
_level = st.floats(min_value=1e-6, max_value=1e6, allow_nan=False)


@st.composite
def _bands(draw):
    kind = draw(st.sampled_from(["hz", "order", "overall", "defect", "kurtosis", "envelope"]))
    alert = draw(_level)
    danger = alert * draw(st.floats(min_value=1.001, max_value=100.0))
    low = draw(st.floats(min_value=0.0, max_value=1e4))
    high = low + draw(st.floats(min_value=1e-3, max_value=1e4))
    if kind in ("hz", "order"):
        return dict(measure=draw(st.sampled_from(["band_rms", "band_peak"])), alert=alert,
                    danger=danger, unit=draw(st.sampled_from(["g", "mm/s", "in/s", "um", "mil"])),
                    scale=draw(st.sampled_from(["rms", "peak", "pp"])), low=low, high=high,
                    basis=kind)
    if kind == "overall":
        return dict(measure="overall", alert=alert, danger=danger,
                    unit=draw(st.sampled_from(["mm/s", "in/s"])))
    if kind == "defect":
        return dict(measure="defect", alert=alert, danger=danger, unit="g", scale="peak",
                    defect=draw(st.sampled_from(["ftf", "bsf", "bpfo", "bpfi"])))
    if kind == "envelope":
        return dict(measure="envelope_peak", alert=alert, danger=danger, unit="g",
                    scale="peak", low=low, high=high)
    return dict(measure="kurtosis", alert=alert, danger=danger, unit="1", scale="")


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=_names, note=st.text(max_size=30), bands=st.lists(_bands(), min_size=1, max_size=5))
def test_property_any_valid_plan_round_trips_through_both_files(tmp_path, name, note, bands):
    plan = AlarmPlan(name=name, note=note,
                     bands=tuple(Band(name=f"band {i}", **b) for i, b in enumerate(bands)))
    plan.validate()
    assert AlarmPlan.from_dict(plan.as_dict()) == plan
    for suffix in (".json", ".toml"):
        path = tmp_path / f"p{suffix}"
        write_plan_file(plan, path)
        assert read_plan_file(path) == plan


def test_alarms_import_no_qt():
    # engine/ never imports Qt (DEVELOPERS.md); checked in a fresh interpreter.
    import subprocess
    import sys
    code = "import sys, engine.alarms; print('PySide6' in sys.modules)"
    root = Path(__file__).resolve().parents[1]
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=root)
    assert out.stdout.strip() == "False"
