"""Units and quantities: the one module that owns every conversion.

Vibration is measured as acceleration, velocity or displacement; sensors deliver volts.
Each unit symbol used anywhere in Shaftwatch is listed in :data:`UNITS` with its
quantity and its factor to SI (m/s², m/s, m, V).

Symbols (as typed on the command line): ``g``, ``m/s2``, ``mm/s``, ``in/s``, ``m/s``,
``um``, ``mm``, ``mil``, ``m``, ``V``.

References
----------
.. [1] BIPM / CGPM (1901), 3rd General Conference: standard acceleration of gravity
   g_n = 9.80665 m/s² (also ISO 80000-3).
.. [2] International yard and pound agreement (1959): 1 in = 25.4 mm exactly.
.. [3] ISO 1683:2015, Acoustics — Preferred reference values for acoustical and
   vibratory levels: acceleration 1 µm/s², velocity 1 nm/s, displacement 1 pm
   (from memory of the standard's table).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from .errors import InputError

#: Standard acceleration of gravity in m/s² (CGPM 1901, ISO 80000-3).
STANDARD_GRAVITY = 9.80665
#: One inch in metres, exactly.
INCH_M = 0.0254

ACCELERATION = "acceleration"
VELOCITY = "velocity"
DISPLACEMENT = "displacement"
VOLTAGE = "voltage"

#: Order of integration of each quantity relative to acceleration.
_INTEGRATION_ORDER = {ACCELERATION: 0, VELOCITY: 1, DISPLACEMENT: 2}


@dataclass(frozen=True)
class Unit:
    """A unit symbol, its quantity and its factor to the SI unit of that quantity."""

    symbol: str
    quantity: str
    to_si: float
    label: str


UNITS: dict[str, Unit] = {
    u.symbol: u
    for u in (
        Unit("g", ACCELERATION, STANDARD_GRAVITY, "g"),
        Unit("m/s2", ACCELERATION, 1.0, "m/s²"),
        Unit("mm/s", VELOCITY, 1e-3, "mm/s"),
        Unit("in/s", VELOCITY, INCH_M, "in/s"),
        Unit("m/s", VELOCITY, 1.0, "m/s"),
        Unit("um", DISPLACEMENT, 1e-6, "µm"),
        Unit("mm", DISPLACEMENT, 1e-3, "mm"),
        Unit("mil", DISPLACEMENT, INCH_M * 1e-3, "mil"),
        Unit("m", DISPLACEMENT, 1.0, "m"),
        Unit("V", VOLTAGE, 1.0, "V"),
    )
}

_ALIASES = {
    "m/s^2": "m/s2", "m/s²": "m/s2", "ms-2": "m/s2", "µm": "um", "μm": "um",
    "micron": "um", "ips": "in/s", "mils": "mil", "v": "V", "volt": "V", "volts": "V",
    "G": "g",
}

#: ISO 1683 reference values in SI units ([3]).
DB_REFERENCE_SI = {ACCELERATION: 1e-6, VELOCITY: 1e-9, DISPLACEMENT: 1e-12}

#: Default low-frequency cut for integration, in Hz.  Below it the 1/(2πf) gain of
#: integration would amplify sensor noise and bias into a large false low end
#: (common practice: 2 Hz for spectra of machines above 120 rpm).
DEFAULT_LOW_CUT_HZ = 2.0

#: SI and US unit per quantity, for the unit-system preference.
SI_UNITS = {ACCELERATION: "g", VELOCITY: "mm/s", DISPLACEMENT: "um"}
US_UNITS = {ACCELERATION: "g", VELOCITY: "in/s", DISPLACEMENT: "mil"}


def unit(symbol: str, *, source: str | None = None, field: str = "unit") -> Unit:
    """Look up a unit symbol.

    Raises
    ------
    InputError
        When the symbol is unknown; the message lists the known symbols.
    """
    key = str(symbol).strip()
    key = _ALIASES.get(key, _ALIASES.get(key.lower(), key))
    if key not in UNITS:
        prefix = f"{source}: " if source else ""
        raise InputError(
            f"{prefix}{field} {symbol!r} is not a known unit; expected one of "
            + ", ".join(UNITS)
        )
    return UNITS[key]


def quantity_of(symbol: str) -> str:
    """The quantity (acceleration, velocity, displacement, voltage) of a unit symbol."""
    return unit(symbol).quantity


def scale_factor(from_symbol: str, to_symbol: str) -> float:
    """Factor that converts a value in ``from_symbol`` to ``to_symbol`` (same quantity).

    Examples
    --------
    >>> scale_factor("in/s", "mm/s")  # 1 in = 25.4 mm exactly
    25.4
    """
    a, b = unit(from_symbol), unit(to_symbol)
    if a.quantity != b.quantity:
        raise InputError(
            f"cannot scale {a.symbol} ({a.quantity}) to {b.symbol} ({b.quantity}) "
            "without integration; use convert_spectrum or convert_waveform"
        )
    return a.to_si / b.to_si


def integration_steps(from_symbol: str, to_symbol: str) -> int:
    """Number of integrations (positive) or differentiations (negative) between units."""
    a, b = unit(from_symbol), unit(to_symbol)
    if a.quantity == VOLTAGE or b.quantity == VOLTAGE:
        if a.quantity != b.quantity:
            raise InputError(
                f"cannot convert between volts and {b.symbol if a.quantity == VOLTAGE else a.symbol}"
                " without a sensor sensitivity (give --sensitivity)"
            )
        return 0
    return _INTEGRATION_ORDER[b.quantity] - _INTEGRATION_ORDER[a.quantity]


def frequency_gain(
    frequency_hz: np.ndarray,
    from_symbol: str,
    to_symbol: str,
    *,
    low_cut_hz: float = DEFAULT_LOW_CUT_HZ,
) -> np.ndarray:
    """Magnitude gain that converts a spectrum line from one unit to another.

    Integration divides by ω = 2πf per step, differentiation multiplies by it; lines
    below ``low_cut_hz`` are set to zero when integrating (and DC always is).

    Parameters
    ----------
    frequency_hz : ndarray
        Frequencies of the lines, Hz.
    from_symbol, to_symbol : str
        Unit symbols (see :data:`UNITS`).
    low_cut_hz : float, keyword-only
        Lines below this frequency are zeroed when integrating, Hz.

    Returns
    -------
    ndarray
        Gain per line, same shape as ``frequency_hz``; multiply amplitudes by it.

    Examples
    --------
    1 g peak at 100 Hz is 15.61 mm/s peak (g_n / (2π·100 Hz)):

    >>> round(float(frequency_gain(np.array([100.0]), "g", "mm/s")[0]), 2)
    15.61
    """
    f = np.asarray(frequency_hz, dtype=float)
    steps = integration_steps(from_symbol, to_symbol)
    a, b = unit(from_symbol), unit(to_symbol)
    factor = a.to_si / b.to_si
    if steps == 0:
        return np.full_like(f, factor)
    omega = 2.0 * np.pi * f
    with np.errstate(divide="ignore", invalid="ignore"):
        gain = factor * omega ** (-float(steps))
    if steps > 0:
        gain = np.where((f >= low_cut_hz) & (f > 0), gain, 0.0)
    return gain


def convert_waveform(
    samples: np.ndarray,
    fs_hz: float,
    from_symbol: str,
    to_symbol: str,
    *,
    band_hz: tuple[float, float] | None = None,
    low_cut_hz: float = DEFAULT_LOW_CUT_HZ,
) -> np.ndarray:
    """Convert a waveform between units, integrating in the frequency domain.

    The waveform's DFT is multiplied by ``1/(jω)`` per integration step (``jω`` per
    differentiation), lines outside ``band_hz`` (or below ``low_cut_hz`` when
    integrating) are removed, and the inverse DFT gives the result.  The record is
    treated as periodic, so the mean is always removed.

    Parameters
    ----------
    samples : ndarray, shape (n,)
    fs_hz : float
        Sample rate, Hz.
    from_symbol, to_symbol : str
    band_hz : (low, high), optional
        Keep only this band, Hz (for example ISO 20816's 10–1000 Hz).
    low_cut_hz : float
        Used when ``band_hz`` is not given and integrating.

    Returns
    -------
    ndarray, shape (n,)
    """
    x = np.asarray(samples, dtype=float)
    steps = integration_steps(from_symbol, to_symbol)
    if steps == 0 and band_hz is None:
        return x * scale_factor(from_symbol, to_symbol)
    n = x.size
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(n, 1.0 / fs_hz)
    factor = unit(from_symbol).to_si / unit(to_symbol).to_si
    jw = 2j * np.pi * f
    with np.errstate(divide="ignore", invalid="ignore"):
        h = factor * jw ** (-float(steps)) if steps else np.full(f.shape, factor, complex)
    keep = f > 0
    if band_hz is not None:
        keep &= (f >= band_hz[0]) & (f <= band_hz[1])
    elif steps > 0:
        keep &= f >= low_cut_hz
    h = np.where(keep, h, 0.0)
    return np.fft.irfft(spec * h, n)


_SENS_RE = re.compile(
    r"^\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*(mV|V)?\s*(?:/\s*\(?\s*([^)]*?)\s*\)?)?\s*$"
)


def parse_sensitivity(text: str | float, *, default_unit: str = "g") -> tuple[float, str]:
    """Parse a sensor sensitivity into volts per unit.

    Accepts ``"100mV/g"``, ``"0.1 V/g"``, ``"10.2 mV/(m/s2)"``, ``"4 mV/(mm/s)"`` or a
    bare number, which is read as mV per ``default_unit`` (accelerometer sensitivities
    are quoted in mV/g, common practice).

    Returns
    -------
    (volts_per_unit, unit_symbol)

    Raises
    ------
    InputError
        When the text cannot be read or the sensitivity is not positive.
    """
    if isinstance(text, (int, float)):
        value, volts, per = float(text), "mV", default_unit
    else:
        m = _SENS_RE.match(str(text))
        if not m:
            raise InputError(
                f"sensitivity {text!r} is not readable; write it like 100mV/g or 0.1V/g"
            )
        value = float(m.group(1))
        volts = m.group(2) or "mV"
        per = m.group(3) or default_unit
    if not np.isfinite(value) or value <= 0:
        raise InputError(f"sensitivity {text!r} must be a positive number")
    u = unit(per, field="sensitivity unit")
    if u.quantity == VOLTAGE:
        raise InputError(f"sensitivity {text!r} must be per a vibration unit, not per volt")
    return value * (1e-3 if volts == "mV" else 1.0), u.symbol


def to_db(value_si: np.ndarray, quantity: str) -> np.ndarray:
    """Level in dB re the ISO 1683 reference of ``quantity`` ([3]).

    ``value_si`` is an amplitude (not a power) in SI units; zero gives ``-inf``.
    """
    if quantity not in DB_REFERENCE_SI:
        raise InputError(f"no ISO 1683 reference value for {quantity}")
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.asarray(value_si, dtype=float) / DB_REFERENCE_SI[quantity])
