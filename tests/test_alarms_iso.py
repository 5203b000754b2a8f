"""ISO 20816-3 zones and the generic default plan, on both sides of every boundary."""

import dataclasses
import math

import pytest

from engine.alarms.evaluate import evaluate_run
from engine.alarms.iso import (ZONE_BOUNDARIES_MM_S, default_plan, zone_boundaries,
                               zone_of)
from engine.alarms.measure import MeasureInput, measure_plan
from engine.errors import InputError

# ISO 20816-3 zone boundaries A/B, B/C, C/D, velocity RMS in mm/s (from memory of the
# standard's tables; the user must confirm against their copy).
EXPECTED = {(2, "rigid"): (1.4, 2.8, 4.5), (2, "flexible"): (2.3, 4.5, 7.1),
            (1, "rigid"): (2.3, 4.5, 7.1), (1, "flexible"): (3.5, 7.1, 11.0)}
PAIRS = sorted(EXPECTED)
JUST = 1e-3  # relative step each side of a boundary


@pytest.mark.parametrize("pair", PAIRS)
def test_boundaries_are_the_standards_values(pair):
    assert zone_boundaries(*pair) == EXPECTED[pair]
    assert ZONE_BOUNDARIES_MM_S[pair] == EXPECTED[pair]


@pytest.mark.parametrize("pair", PAIRS)
def test_zone_on_both_sides_of_each_boundary(pair):
    bounds = zone_boundaries(*pair)
    for boundary, below, above in zip(bounds, "ABC", "BCD"):
        assert zone_of(boundary * (1 - JUST), bounds) == below
        assert zone_of(boundary * (1 + JUST), bounds) == above
        assert zone_of(boundary, bounds) == above  # at the boundary: the zone above
    assert zone_of(0.0, bounds) == "A"
    assert zone_of(1000.0, bounds) == "D"
    assert zone_of(math.nan, bounds) == ""


@pytest.mark.parametrize("pair", PAIRS)
def test_default_plan_states_on_both_sides_of_each_boundary(pair):
    plan = default_plan(*pair)
    ab, bc, cd = EXPECTED[pair]
    band = plan.band("overall velocity")
    assert (band.alert, band.danger) == (bc, cd)  # alert = B/C, danger = C/D
    cases = [(ab * (1 - JUST), "ok", "A"), (ab * (1 + JUST), "ok", "B"),
             (bc * (1 - JUST), "ok", "B"), (bc * (1 + JUST), "alert", "C"),
             (cd * (1 - JUST), "alert", "C"), (cd * (1 + JUST), "danger", "D"),
             (bc, "alert", "C"), (cd, "danger", "D")]
    for v, state, zone in cases:
        rs = evaluate_run(plan, {"overall velocity": v})
        assert rs.state == state, (pair, v)
        assert zone_of(v, zone_boundaries(*pair)) == zone
        if state != "ok":
            level = bc if state == "alert" else cd
            assert rs.bands[0].level == level
            assert rs.bands[0].excess == pytest.approx(v / level - 1.0, rel=1e-12)


@pytest.mark.parametrize("pair", PAIRS)
def test_default_plan_contents(pair):
    plan = default_plan(*pair)
    g, f = pair
    assert plan.origin == f"ISO 20816-3 group {g}, {f} (generic)"
    assert "generic" in plan.note.lower()
    assert "manufacturer" in plan.note and "take precedence" in plan.note
    (band,) = plan.bands
    assert (band.measure, band.unit, band.scale, band.low, band.high) == (
        "overall", "mm/s", "rms", None, None)
    # ISO 20816-1 broadband 10–1000 Hz above 600 rpm (from memory of the standard's text)
    assert band.edges_hz(1480.0) == (10.0, 1000.0)
    plan.validate(fmax_hz=1000.0)


def test_default_plan_reads_the_overall_level_in_other_velocity_units():
    # 1 in = 25.4 mm exactly (1959 agreement): 4.5 mm/s = 0.17717 in/s.
    plan = default_plan(2, "rigid")
    values = measure_plan(plan, MeasureInput(overall_velocity_mm_s=4.5))
    assert values == {"overall velocity": pytest.approx(4.5)}
    assert evaluate_run(plan, values).state == "danger"
    assert evaluate_run(plan, measure_plan(plan, MeasureInput())).state == "no data"
    (band,) = plan.bands
    us = dataclasses.replace(plan, bands=(dataclasses.replace(
        band, unit="in/s", alert=band.alert / 25.4, danger=band.danger / 25.4),))
    values = measure_plan(us, MeasureInput(overall_velocity_mm_s=4.5))
    assert values["overall velocity"] == pytest.approx(4.5 / 25.4, rel=1e-12)
    assert values["overall velocity"] == pytest.approx(0.17717, rel=1e-4)
    assert evaluate_run(us, {"overall velocity": 4.4 / 25.4}).state == "alert"


def test_foundation_case_and_unknown_groups():
    assert zone_boundaries(2, " Rigid ") == (1.4, 2.8, 4.5)
    for group, foundation, message in [(3, "rigid", "group must be 1"),
                                       (True, "rigid", "group must be 1"),
                                       (2, "soft", "foundation must be rigid or flexible")]:
        with pytest.raises(InputError, match=message):
            zone_boundaries(group, foundation)
        with pytest.raises(InputError, match=message):
            default_plan(group, foundation)


def test_zone_of_refuses_bad_values_and_boundaries():
    b = zone_boundaries(2, "rigid")
    with pytest.raises(InputError, match="velocity must be a finite RMS value"):
        zone_of(-0.1, b)
    with pytest.raises(InputError, match="velocity must be a finite RMS value"):
        zone_of(math.inf, b)
    with pytest.raises(InputError, match="velocity must be a number"):
        zone_of(None, b)
    with pytest.raises(InputError, match="must increase"):
        zone_of(1.0, (2.8, 1.4, 4.5))
    with pytest.raises(InputError, match="three numbers"):
        zone_of(1.0, (1.4, 2.8))
