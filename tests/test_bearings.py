"""Bearing defect frequencies against a published bearing table and the kinematics."""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from engine.bearings import (BearingGeometry, defect_frequencies_hz, defect_markers,
                             defect_orders)
from engine.errors import InputError

# Case Western Reserve University Bearing Data Center: drive-end and fan-end bearings of
# the test rig and their defect frequencies in multiples of shaft speed (the data
# center's table, copied in ../shared/data/README.md).  The table's "rolling element"
# column is 2 × BSF.
CWRU_DRIVE_END = BearingGeometry("drive end", 9, 0.3126, 1.537, 0.0, unit="in")
CWRU_FAN_END = BearingGeometry("fan end", 8, 0.2656, 1.122, 0.0, unit="in")


@pytest.mark.parametrize("geometry, table", [
    (CWRU_DRIVE_END, {"bpfi": 5.4152, "bpfo": 3.5848, "ftf": 0.39828, "bsf2": 4.7135}),
    (CWRU_FAN_END, {"bpfi": 4.9469, "bpfo": 3.0530, "ftf": 0.3817, "bsf2": 3.9874}),
])
def test_orders_match_the_cwru_bearing_table(geometry, table):
    # Source: Case Western Reserve University Bearing Data Center, bearing table.
    orders = defect_orders(geometry).as_dict()
    for name, expected in table.items():
        assert orders[name] == pytest.approx(expected, rel=1e-3), name
    assert orders["bsf"] == pytest.approx(table["bsf2"] / 2, rel=1e-3)


@given(n=st.integers(3, 40), d=st.floats(0.5, 60.0), ratio=st.floats(0.05, 0.6),
       angle=st.floats(0.0, 60.0))
def test_identities_of_the_kinematic_formulas(n, d, ratio, angle):
    # Harris & Kotzalas, Rolling Bearing Analysis: BPFO = n(1 − ρ)/2, BPFI = n(1 + ρ)/2,
    # FTF = (1 − ρ)/2, so BPFO + BPFI = n and BPFO = n · FTF whatever the geometry.
    g = BearingGeometry("any", n, d, d / ratio, angle)
    o = defect_orders(g)
    assert o.bpfo + o.bpfi == pytest.approx(n, rel=1e-12)
    assert o.bpfo == pytest.approx(n * o.ftf, rel=1e-12)
    assert o.bsf2 == pytest.approx(2 * o.bsf, rel=1e-15)
    assert 0 < o.ftf < 0.5 < 1 - o.ftf  # the cage turns slower than half shaft speed
    assert o.bpfo < n / 2 < o.bpfi


def test_small_elements_roll_at_half_speed():
    # First principles: as d/D → 0 the cage turns at half the inner-ring speed, so
    # FTF → 1/2 and BPFO, BPFI → n/2 (Harris & Kotzalas, rolling without slip).
    o = defect_orders(BearingGeometry("tiny", 12, 1e-6, 100.0))
    assert o.ftf == pytest.approx(0.5, rel=1e-6)
    assert o.bpfo == pytest.approx(6.0, rel=1e-6)
    assert o.bpfi == pytest.approx(6.0, rel=1e-6)


def test_contact_angle_enters_through_its_cosine():
    # Harris & Kotzalas: ρ = d/D · cos α; at 60°, cos α = 1/2, the same as halving d.
    tilted = defect_orders(BearingGeometry("tilted", 10, 12.0, 60.0, 60.0))
    halved = defect_orders(BearingGeometry("halved", 10, 6.0, 60.0, 0.0))
    assert tilted.bpfo == pytest.approx(halved.bpfo, rel=1e-12)
    assert tilted.ftf == pytest.approx(halved.ftf, rel=1e-12)


def test_millimetres_and_inches_give_the_same_orders():
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959).
    mm = BearingGeometry("drive end", 9, 0.3126 * 25.4, 1.537 * 25.4, unit="mm")
    assert defect_orders(mm).as_dict() == pytest.approx(
        defect_orders(CWRU_DRIVE_END).as_dict(), rel=1e-12)


def test_frequencies_are_orders_times_shaft_speed():
    # Definition of an order: cycles per revolution; 1797 rpm is 29.95 rev/s.
    hz = defect_frequencies_hz(CWRU_DRIVE_END, 1797.0)
    assert hz["bpfi"] == pytest.approx(5.4152 * 1797.0 / 60.0, rel=1e-3)  # CWRU table
    assert hz["bpfo"] == pytest.approx(3.5848 * 1797.0 / 60.0, rel=1e-3)
    with pytest.raises(InputError, match="rpm"):
        defect_frequencies_hz(CWRU_DRIVE_END, 0.0)


def test_markers_carry_the_typical_sidebands():
    # Randall & Antoni (2011), MSSP 25:485–520: BPFI is modulated at shaft speed, BSF at
    # the cage speed FTF; a fixed outer race under fixed load shows no sidebands.
    shaft = 1797.0 / 60.0
    o = defect_orders(CWRU_DRIVE_END)
    markers = defect_markers(CWRU_DRIVE_END, shaft, harmonics=3, sidebands=2)
    by_label = {m.label: m for m in markers}
    assert by_label["BPFO"].frequency_hz == pytest.approx(o.bpfo * shaft)
    assert by_label["2×BPFO"].frequency_hz == pytest.approx(2 * o.bpfo * shaft)
    assert by_label["BPFI\u22121×"].frequency_hz == pytest.approx((o.bpfi - 1) * shaft)
    assert by_label["3×BPFI+2×"].frequency_hz == pytest.approx((3 * o.bpfi + 2) * shaft)
    assert by_label["2×BSF+1×FTF"].frequency_hz == pytest.approx((2 * o.bsf + o.ftf) * shaft)
    assert by_label["BPFI+1×"].kind == "sideband" and by_label["BPFI"].kind == "harmonic"
    per_family = {f: [m for m in markers if m.family == f] for f in ("FTF", "BSF", "BPFO", "BPFI")}
    assert len(per_family["BPFO"]) == 3 and all(m.kind == "harmonic" for m in per_family["BPFO"])
    assert len(per_family["FTF"]) == 3
    assert len(per_family["BPFI"]) == 3 * (1 + 2 * 2)
    assert len(per_family["BSF"]) == 3 * (1 + 2 * 2)
    assert all(m.frequency_hz > 0 for m in markers)
    assert [m.family for m in markers] == sorted(
        (m.family for m in markers), key=("FTF", "BSF", "BPFO", "BPFI").index)


def test_markers_without_sidebands():
    markers = defect_markers(CWRU_FAN_END, 25.0, harmonics=1, sidebands=0)
    assert [m.label for m in markers] == ["FTF", "BSF", "BPFO", "BPFI"]


@pytest.mark.parametrize("kwargs, field", [
    ({"elements": 2}, "elements"),
    ({"elements": 9.0}, "elements"),
    ({"elements": True}, "elements"),
    ({"element_diameter": 0.0}, "element_diameter"),
    ({"element_diameter": -1.0}, "element_diameter"),
    ({"element_diameter": math.nan}, "element_diameter"),
    ({"pitch_diameter": 0.0}, "pitch_diameter"),
    ({"element_diameter": 50.0, "pitch_diameter": 50.0}, "element_diameter"),
    ({"contact_angle_deg": -1.0}, "contact_angle_deg"),
    ({"contact_angle_deg": 61.0}, "contact_angle_deg"),
    ({"contact_angle_deg": "steep"}, "contact_angle_deg"),
    ({"unit": "cm"}, "unit"),
])
def test_bad_geometry_is_refused_naming_the_field(kwargs, field):
    args = {"label": "X", "elements": 9, "element_diameter": 10.0, "pitch_diameter": 50.0}
    args.update(kwargs)
    with pytest.raises(InputError, match=field) as err:
        BearingGeometry(**args)
    assert "'X'" in str(err.value)


@pytest.mark.parametrize("kwargs", [{"harmonics": 0}, {"sidebands": -1}, {"harmonics": 1.5}])
def test_bad_marker_options_are_refused(kwargs):
    with pytest.raises(InputError):
        defect_markers(CWRU_DRIVE_END, 30.0, **kwargs)
    with pytest.raises(InputError, match="shaft_hz"):
        defect_markers(CWRU_DRIVE_END, -1.0)
