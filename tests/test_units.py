"""Units: exact definitions and the worked conversion example."""

import numpy as np
import pytest

from engine.errors import InputError
from engine.units import (
    STANDARD_GRAVITY,
    convert_waveform,
    frequency_gain,
    parse_sensitivity,
    scale_factor,
    to_db,
    unit,
)


def test_exact_definitions():
    # CGPM 1901 / ISO 80000-3: g_n = 9.80665 m/s²; 1959 agreement: 1 in = 25.4 mm.
    assert STANDARD_GRAVITY == 9.80665
    assert scale_factor("in/s", "mm/s") == pytest.approx(25.4, rel=1e-15)
    assert scale_factor("mil", "um") == pytest.approx(25.4, rel=1e-15)
    assert scale_factor("g", "m/s2") == 9.80665


def test_worked_example_one_g_at_100_hz():
    # From first principles: v = a/(2πf); 1 g peak at 100 Hz = 15.61 mm/s peak,
    # 11.04 mm/s RMS.
    g = float(frequency_gain(np.array([100.0]), "g", "mm/s")[0])
    assert g == pytest.approx(15.61, abs=0.005)
    assert g / np.sqrt(2) == pytest.approx(11.04, abs=0.005)


def test_integration_low_cut_and_differentiation():
    f = np.array([0.0, 1.0, 2.0, 50.0])
    gain = frequency_gain(f, "m/s2", "m/s", low_cut_hz=2.0)
    assert gain[0] == 0 and gain[1] == 0
    assert gain[3] == pytest.approx(1 / (2 * np.pi * 50))
    back = frequency_gain(f, "m/s", "m/s2")
    assert back[3] == pytest.approx(2 * np.pi * 50)


def test_waveform_integration_of_a_sine():
    # ∫ A sin(ωt) dt = −A/ω cos(ωt): amplitude A/ω, phase lag 90°.
    fs, f0 = 10000.0, 125.0
    t = np.arange(10000) / fs
    a = np.sin(2 * np.pi * f0 * t)
    v = convert_waveform(a, fs, "m/s2", "m/s")
    np.testing.assert_allclose(v, -np.cos(2 * np.pi * f0 * t) / (2 * np.pi * f0), atol=1e-12)


@pytest.mark.parametrize("text,expected", [("100mV/g", (0.1, "g")), ("0.1 V/g", (0.1, "g")),
                                           ("10.2 mV/(m/s2)", (0.0102, "m/s2")),
                                           ("4 mV/(mm/s)", (0.004, "mm/s")),
                                           ("100", (0.1, "g"))])
def test_parse_sensitivity(text, expected):
    v, u = parse_sensitivity(text)
    assert v == pytest.approx(expected[0]) and u == expected[1]


@pytest.mark.parametrize("bad", ["", "abc", "-5mV/g", "0 mV/g", "100 mV/V", "100 mV/furlong"])
def test_bad_sensitivity(bad):
    with pytest.raises(InputError):
        parse_sensitivity(bad)


def test_unknown_unit_message_names_field_and_file():
    with pytest.raises(InputError, match=r"a\.wav: --unit 'mm/h' is not a known unit"):
        unit("mm/h", source="a.wav", field="--unit")
    with pytest.raises(InputError, match="without integration"):
        scale_factor("g", "mm/s")


def test_iso_1683_reference_values():
    # ISO 1683:2015 (from memory): 1 µm/s², 1 nm/s, 1 pm.
    assert to_db(1e-6, "acceleration") == pytest.approx(0.0)
    assert to_db(1e-3, "velocity") == pytest.approx(120.0)
    assert to_db(1e-6, "displacement") == pytest.approx(120.0)
