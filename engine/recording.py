"""The in-memory form of a recording: channels of samples with their metadata.

Every reader (WAV, MAT, CSV, the archive, the simulated machine) returns a
:class:`Recording`; every analysis takes a channel's samples and ``fs_hz`` from it.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import datetime

import numpy as np

from .errors import InputError
from .units import VOLTAGE, unit

#: Directions a channel can be measured in: horizontal, vertical, axial, radial.
DIRECTIONS = ("H", "V", "A", "R")


@dataclass(frozen=True)
class QualityFinding:
    """One data-quality observation on a channel.

    ``severity`` is ``"warning"`` (analysis goes on, the result says so) or ``"error"``
    (the channel cannot be analysed).  ``code`` is a stable short word: ``clipping``,
    ``dc_offset``, ``flat``, ``non_finite``, ``uneven_time``, ``too_short``, ``truncated``.
    """

    code: str
    severity: str
    message: str
    channel: int | None = None

    def as_dict(self) -> dict:
        return {"code": self.code, "severity": self.severity, "message": self.message,
                "channel": self.channel}


@dataclass
class Channel:
    """One channel of samples.

    Attributes
    ----------
    samples : ndarray of float64, shape (n,)
        Values in ``unit``.
    unit : str
        Unit symbol (see :mod:`engine.units`).
    name : str
    direction : str or None
        One of :data:`DIRECTIONS`.
    sensitivity_v_per_unit : float or None
        The sensor sensitivity used to convert from volts, when one was.
    full_scale : float or None
        The value (in ``unit``) of integer full scale, for clipping checks.
    """

    samples: np.ndarray
    unit: str
    name: str = ""
    direction: str | None = None
    sensitivity_v_per_unit: float | None = None
    full_scale: float | None = None

    @property
    def quantity(self) -> str:
        return unit(self.unit).quantity


@dataclass
class Recording:
    """Samples of one or more channels taken together at one sample rate.

    Attributes
    ----------
    fs_hz : float
        Sample rate, Hz.
    channels : list of Channel
    source : str
        Where it came from (a file path or a description), used in messages.
    rpm : float or None
        Shaft speed when known, rev/min.
    taken : datetime or None
        When the recording was taken (UTC).
    quality : list of QualityFinding
    tach_channel : int or None
        Index of the channel that holds tachometer pulses, when there is one.
    """

    fs_hz: float
    channels: list[Channel]
    source: str = ""
    rpm: float | None = None
    taken: datetime | None = None
    quality: list[QualityFinding] = field(default_factory=list)
    tach_channel: int | None = None

    def __post_init__(self) -> None:
        if not np.isfinite(self.fs_hz) or self.fs_hz <= 0:
            raise InputError(f"{self.source or 'recording'}: sample rate must be a "
                             f"positive number of Hz, got {self.fs_hz!r}")

    @property
    def n_samples(self) -> int:
        return int(self.channels[0].samples.size) if self.channels else 0

    @property
    def duration_s(self) -> float:
        return self.n_samples / self.fs_hz

    def channel(self, index: int) -> Channel:
        """Channel ``index`` (0-based), with a clear error when it does not exist."""
        if not 0 <= index < len(self.channels):
            raise InputError(
                f"{self.source}: channel {index} does not exist; the recording has "
                f"{len(self.channels)} channel(s), numbered 0 to {len(self.channels) - 1}"
            )
        return self.channels[index]

    def errors(self, channel: int | None = None) -> list[QualityFinding]:
        """Quality findings of severity error (for one channel, or all)."""
        return [q for q in self.quality if q.severity == "error"
                and (channel is None or q.channel in (None, channel))]


def apply_sensitivity(ch: Channel, sensitivity: tuple[float, str], *, source: str = "") -> Channel:
    """Convert a channel in volts to engineering units with ``(V per unit, unit)``."""
    if unit(ch.unit).quantity != VOLTAGE:
        raise InputError(
            f"{source}: a sensitivity was given but channel {ch.name!r} is already in "
            f"{ch.unit}, not volts; give --input-unit V to apply it"
        )
    v_per_unit, sym = sensitivity
    fs = None if ch.full_scale is None else ch.full_scale / v_per_unit
    return replace(ch, samples=ch.samples / v_per_unit, unit=sym,
                   sensitivity_v_per_unit=v_per_unit, full_scale=fs)
