"""Sound-card and USB audio input through python-sounddevice (PortAudio).

A missing python-sounddevice or PortAudio library gives one clear reason
(:func:`sound_card_status`) at the point of use, never an error at import: the module
is loaded only when the live view asks for it.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from types import ModuleType

from engine.errors import InputError
from engine.validate import require_positive

from .live_sources import LiveSource, SampleRing

INSTALL_HINT = ("To use a sound card, install python-sounddevice with “pip install "
                "sounddevice” in Shaftwatch's Python environment and, on Debian or Ubuntu, "
                "the PortAudio library with “sudo apt-get install libportaudio2”; then "
                "restart Shaftwatch.")


@dataclass(frozen=True)
class SoundCardStatus:
    """Whether sound-card input can be used, and if not why and how to fix it."""

    available: bool
    reason: str
    module: ModuleType | None = None


def sound_card_status() -> SoundCardStatus:
    """Try to load python-sounddevice and PortAudio.

    Returns
    -------
    SoundCardStatus
        ``available`` False with the reason and how to install what is missing when
        the module is not installed (ImportError) or PortAudio cannot be loaded
        (sounddevice raises OSError at import then).
    """
    try:
        sd = importlib.import_module("sounddevice")
    except ImportError as exc:
        return SoundCardStatus(False, "Sound-card input is not available: python-sounddevice "
                               f"is not installed ({exc}). " + INSTALL_HINT)
    except OSError as exc:
        return SoundCardStatus(False, "Sound-card input is not available: the PortAudio "
                               f"library could not be loaded ({exc}). " + INSTALL_HINT)
    return SoundCardStatus(True, "", sd)


@dataclass(frozen=True)
class InputDevice:
    """A sound-card input: PortAudio index, name, input channels, default rate (Hz)."""

    index: int
    name: str
    channels: int
    default_rate_hz: float


#: Sample rates offered for sound cards, Hz (those the device accepts are listed).
SOUND_CARD_RATES = (8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 192000)


def input_devices(sd: ModuleType) -> list[InputDevice]:
    """Every device with at least one input channel."""
    out = []
    for i, d in enumerate(sd.query_devices()):
        if int(d.get("max_input_channels", 0)) > 0:
            out.append(InputDevice(int(d.get("index", i)), str(d["name"]),
                                   int(d["max_input_channels"]),
                                   float(d.get("default_samplerate", 48000.0))))
    return out


def device_rates(sd: ModuleType, device: InputDevice) -> list[float]:
    """Sample rates (Hz) the device accepts, its default first."""
    rates = [device.default_rate_hz]
    for r in SOUND_CARD_RATES:
        if float(r) in rates:
            continue
        try:
            sd.check_input_settings(device=device.index, channels=1, samplerate=r)
        except Exception:  # noqa: BLE001 - PortAudio refuses the rate: not offered
            continue
        rates.append(float(r))
    return rates


class SoundCardSource(LiveSource):
    """A sound card or USB audio input through python-sounddevice.

    Samples arrive as floats with ±1 at the card's full scale; they are converted to g
    with the input voltage at full scale and the sensor's sensitivity:
    ``g = sample · full_scale_v / sensitivity_v_per_g``.

    Parameters
    ----------
    sd : module
        python-sounddevice (from :func:`sound_card_status`).
    device : int
        PortAudio device index.
    fs_hz : float
        Sample rate, Hz.
    channel : int
        Input channel (0-based).
    sensitivity_mv_per_g : float
        Sensor sensitivity, mV/g (100 mV/g for a general-purpose accelerometer,
        common practice).
    full_scale_v : float
        Input voltage that reads full scale on the card, V peak.
    device_name : str
        Named in messages.
    """

    kind = "sound card"

    def __init__(self, sd: ModuleType, device: int, fs_hz: float, channel: int = 0, *,
                 sensitivity_mv_per_g: float = 100.0, full_scale_v: float = 1.0,
                 device_name: str = "") -> None:
        name = device_name or f"device {device}"
        super().__init__(fs_hz, "g", f"sound card {name}")
        sens = require_positive(sensitivity_mv_per_g, "sensitivity (mV/g)",
                                source=self.description)
        fsv = require_positive(full_scale_v, "full scale (V)", source=self.description)
        if int(channel) < 0:
            raise InputError(f"{self.description}: channel must be 0 or more, got {channel}")
        self._sd, self._device, self._channel = sd, int(device), int(channel)
        self._sens_v = sens * 1e-3
        self._factor = fsv / self._sens_v
        self._stream = None
        self._paused = False

    @property
    def sensitivity_v_per_unit(self) -> float:
        return self._sens_v

    def _callback(self, indata, frames, time_info, status) -> None:
        # PortAudio's thread: copy the block into the ring and nothing more.
        if status and getattr(status, "input_overflow", False):
            self.ring.note_dropped(1)
        self.ring.write(indata[:, self._channel] * self._factor)

    def start(self, ring: SampleRing) -> None:
        self.ring = ring
        try:
            self._stream = self._sd.InputStream(
                device=self._device, channels=self._channel + 1, samplerate=self.fs_hz,
                dtype="float32", callback=self._callback)
            self._stream.start()
        except Exception as exc:  # noqa: BLE001 - PortAudio's errors become InputError
            self._stream = None
            raise InputError(f"{self.description}: cannot open the input at "
                             f"{self.fs_hz:g} Hz, channel {self._channel + 1}: {exc}") from exc

    def pause(self) -> None:
        if self._stream is not None and not self._paused:
            self._stream.stop()
            self._paused = True

    def resume(self) -> None:
        if self._stream is not None and self._paused:
            self._stream.start()
            self._paused = False

    def stop(self) -> None:
        if self._stream is not None:
            try:
                self._stream.stop()
                self._stream.close()
            finally:
                self._stream = None

    @property
    def running(self) -> bool:
        return self._stream is not None and not self._paused
