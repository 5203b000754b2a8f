"""Where live samples come from, and the ring buffer they fill.

Three sources feed the live view:

* :class:`SimulatedSource` — the engine's simulated machine
  (:class:`engine.simulate.SimulatedStream`) with speed, 1× level, outer-race fault and
  noise that can be changed while it runs;
* :class:`app.live_soundcard.SoundCardSource` — a sound card or USB audio interface
  through python-sounddevice (PortAudio), with the sensor's sensitivity;
* :class:`ReplaySource` — a recording (a file or a run of the archive) replayed at its
  own sample rate in real time.

Every source only turns a block into the channel's unit and writes it into a
:class:`SampleRing`, from its own worker thread (or PortAudio's callback thread); the
view drains the ring on the GUI thread.  Nothing here imports Qt.
"""

from __future__ import annotations

import threading
from abc import ABC, abstractmethod
import time
from dataclasses import dataclass

import numpy as np

from engine.errors import InputError
from engine.recording import Recording
from engine.simulate import MachineSignal, SimulatedStream
from engine.validate import require_positive

#: Length of one block a paced source produces, s (short enough for smooth drawing).
BLOCK_S = 0.02
#: A paced source more than this far behind real time skips ahead and counts the
#: skipped blocks as dropped, s.
MAX_LAG_S = 0.5



class SampleRing:
    """A thread-safe ring of the latest samples of one channel.

    Writers (source threads) call :meth:`write`; the reader (the GUI thread) asks for
    everything written since an absolute sample index with :meth:`read_since` and for
    the latest samples with :meth:`latest`.  Samples the reader did not fetch before
    they were overwritten are reported as lost.

    Parameters
    ----------
    capacity : int
        Samples kept (the longest span a reader can fetch or keep).
    """

    def __init__(self, capacity: int) -> None:
        if int(capacity) < 1:
            raise InputError(f"sample ring: capacity must be at least 1 sample, got {capacity}")
        self.capacity = int(capacity)
        self._buf = np.zeros(self.capacity)
        self._lock = threading.Lock()
        self._written = 0
        self._dropped = 0

    @property
    def written(self) -> int:
        """Samples written since the ring was made or cleared."""
        with self._lock:
            return self._written

    @property
    def dropped_blocks(self) -> int:
        """Blocks a source reported as lost (overflow, could not keep real time)."""
        with self._lock:
            return self._dropped

    def note_dropped(self, blocks: int = 1) -> None:
        """Count blocks that never reached the ring."""
        with self._lock:
            self._dropped += int(blocks)

    def clear(self) -> None:
        with self._lock:
            self._written = 0
            self._dropped = 0

    def write(self, block: np.ndarray) -> None:
        """Append samples (any length; only the last ``capacity`` are kept)."""
        x = np.asarray(block, dtype=float).ravel()
        n = x.size
        if n == 0:
            return
        with self._lock:
            if n >= self.capacity:
                x = x[-self.capacity:]
                start = (self._written + n - self.capacity) % self.capacity
                m = self.capacity
            else:
                start, m = self._written % self.capacity, n
            first = min(m, self.capacity - start)
            self._buf[start:start + first] = x[:first]
            if first < m:
                self._buf[:m - first] = x[first:]
            self._written += n

    def _copy(self, start: int, n: int, out: np.ndarray) -> None:
        """Copy ``n`` samples from absolute index ``start`` (lock held)."""
        i = start % self.capacity
        first = min(n, self.capacity - i)
        out[:first] = self._buf[i:i + first]
        if first < n:
            out[first:n] = self._buf[:n - first]

    def read_since(self, start: int, limit: int | None = None
                   ) -> tuple[np.ndarray, int, int]:
        """Samples written from absolute index ``start`` on.

        Parameters
        ----------
        start : int
            Absolute index of the first sample wanted (the ``next`` of the last call).
        limit : int, optional
            At most this many samples (the oldest first); the rest stay for later.

        Returns
        -------
        (samples, next, lost)
            A new array, the index to ask from next time, and how many samples were
            overwritten before they could be read.
        """
        with self._lock:
            oldest = max(0, self._written - self.capacity)
            lost = max(0, oldest - start)
            start = max(start, oldest)
            n = self._written - start
            if limit is not None:
                n = min(n, int(limit))
            out = np.empty(max(n, 0))
            if n > 0:
                self._copy(start, n, out)
            return out, start + max(n, 0), lost

    def latest(self, n: int, out: np.ndarray | None = None) -> np.ndarray:
        """The last ``n`` samples (fewer when fewer were written), oldest first.

        ``out`` (length ≥ n) is filled and a view of it returned, so that a caller
        drawing at a fixed rate allocates nothing.
        """
        with self._lock:
            n = min(int(n), self._written, self.capacity)
            if out is None:
                out = np.empty(n)
            self._copy(self._written - n, n, out)
            return out[:n]


class LiveSource(ABC):
    """What every source offers the live view.

    Attributes
    ----------
    kind : str
        ``"simulated"``, ``"sound card"`` or ``"replay"``.
    description : str
        One line for the status text and the stored run's notes.
    fs_hz : float
        Sample rate, Hz.
    unit : str
        Unit symbol of the samples (see :mod:`engine.units`).
    error : str or None
        Set when the source stopped because of a problem (shown to the user).
    finished : bool
        True when a replay without looping reached the end.
    """

    kind = ""

    def __init__(self, fs_hz: float, unit: str, description: str) -> None:
        self.fs_hz = require_positive(fs_hz, "sample rate", source=description)
        self.unit = unit
        self.description = description
        self.error: str | None = None
        self.finished = False
        self.ring: SampleRing | None = None

    @property
    def rpm(self) -> float | None:
        """Shaft speed when the source knows it, rev/min."""
        return None

    @property
    def sensitivity_v_per_unit(self) -> float | None:
        """Sensor sensitivity the samples were converted with, V per unit."""
        return None

    @abstractmethod
    def start(self, ring: SampleRing) -> None:
        """Begin delivering samples into ``ring``."""

    @abstractmethod
    def pause(self) -> None:
        """Stop delivering samples for now (the position is kept)."""

    @abstractmethod
    def resume(self) -> None:
        """Deliver samples again after :meth:`pause`."""

    @abstractmethod
    def stop(self) -> None:
        """Stop for good and release the device or the thread."""

    @property
    @abstractmethod
    def running(self) -> bool:
        """True while samples are being delivered."""


class PacedSource(LiveSource):
    """A source that computes its blocks on a worker thread, paced to the wall clock.

    Subclasses give :meth:`next_block`.  When the thread falls more than
    :data:`MAX_LAG_S` behind real time (a busy machine), it skips ahead and counts the
    skipped blocks as dropped.
    """

    def __init__(self, fs_hz: float, unit: str, description: str) -> None:
        super().__init__(fs_hz, unit, description)
        self._thread: threading.Thread | None = None
        self._stop = threading.Event()
        self._go = threading.Event()
        self._block = max(1, int(round(BLOCK_S * self.fs_hz)))
        self.skipped_samples = 0

    @abstractmethod
    def next_block(self, n: int) -> np.ndarray | None:
        """The next ``n`` samples (fewer or ``None`` at the end of a recording)."""

    def skip(self, n: int) -> None:
        """Move on by ``n`` samples without delivering them (after falling behind).

        The simulated machine simply runs on; a replay moves its position
        (:meth:`ReplaySource.skip`)."""
        self.skipped_samples += int(n)

    def start(self, ring: SampleRing) -> None:
        if self._thread is not None:
            raise InputError(f"{self.description}: the source was already started")
        self.ring = ring
        self._go.set()
        self._thread = threading.Thread(target=self._run, name=f"live: {self.kind}",
                                        daemon=True)
        self._thread.start()

    def pause(self) -> None:
        self._go.clear()

    def resume(self) -> None:
        self._go.set()

    def stop(self) -> None:
        self._stop.set()
        self._go.set()
        if self._thread is not None:
            self._thread.join(timeout=5.0)

    @property
    def running(self) -> bool:
        return (self._thread is not None and self._thread.is_alive()
                and self._go.is_set() and not self._stop.is_set())

    def _run(self) -> None:
        ring = self.ring
        fs, block = self.fs_hz, self._block
        try:
            while not self._stop.is_set():
                if not self._go.is_set():
                    self._go.wait()
                t0, sent = time.monotonic(), 0
                while self._go.is_set() and not self._stop.is_set():
                    due = int((time.monotonic() - t0) * fs) - sent
                    if due < block:
                        time.sleep((block - due) / fs)
                        continue
                    if due > MAX_LAG_S * fs:
                        skipped = (due - block) // block * block
                        self.skip(skipped)
                        ring.note_dropped(skipped // block)
                        sent += skipped
                        due -= skipped
                    x = self.next_block(min(due, 4 * block))
                    if x is None or x.size == 0:
                        self.finished = True
                        self._go.clear()
                        self._stop.set()
                        break
                    ring.write(x)
                    sent += x.size
        except Exception as exc:  # noqa: BLE001 - shown to the user by the view
            self.error = f"{self.description}: {type(exc).__name__}: {exc}"
            self._stop.set()


@dataclass(frozen=True)
class MachineSettings:
    """The simulated machine's controls.

    Attributes
    ----------
    rpm : float
        Shaft speed, rev/min.
    imbalance_g : float
        1× (imbalance) amplitude, g peak.
    fault_level : float
        Outer-race defect, 0 (none) … 1 (strong: impacts of 2 g exciting a resonance
        at fs/8, see :class:`engine.simulate.SimulatedStream`).
    noise_g : float
        White noise, g RMS over 0 … fs/2.
    """

    rpm: float = 1480.0
    imbalance_g: float = 0.2
    fault_level: float = 0.0
    noise_g: float = 0.01


class SimulatedSource(PacedSource):
    """The engine's simulated machine, endless, paced to real time.

    A slow ±0.1 % speed wobble keeps it from being perfectly clean.  Speed changes ramp
    at 600 rpm/s (the stream's own ramp); the other controls take effect at the next
    block.

    Parameters
    ----------
    settings : MachineSettings
    fs_hz : float
        Sample rate, Hz.
    seed : int
        Seed of the machine's random choices.
    """

    kind = "simulated"
    WOBBLE = 0.001

    def __init__(self, settings: MachineSettings = MachineSettings(), fs_hz: float = 25600.0,
                 *, seed: int = 1) -> None:
        super().__init__(fs_hz, "g", "simulated machine")
        self._signal = MachineSignal(rpm=float(settings.rpm), speed_wobble=self.WOBBLE,
                                     orders={1.0: (float(settings.imbalance_g), 0.0)},
                                     noise_g_rms=float(settings.noise_g), seed=seed)
        self._stream = SimulatedStream(self._signal, self.fs_hz)
        self._stream.set_fault(settings.fault_level)
        self._lock = threading.Lock()
        self._pending: MachineSettings | None = None
        self.settings = settings

    @property
    def rpm(self) -> float:
        return self._stream.rpm

    def update(self, settings: MachineSettings) -> None:
        """New controls (any thread); speed and fault level are checked at once."""
        self._stream.set_rpm(settings.rpm)
        self._stream.set_fault(settings.fault_level)
        for name in ("imbalance_g", "noise_g"):
            value = float(getattr(settings, name))
            if not (np.isfinite(value) and value >= 0.0):
                raise InputError(f"simulated machine: {name} must be ≥ 0, got {value!r}")
        with self._lock:
            self._pending = settings
        self.settings = settings

    def next_block(self, n: int) -> np.ndarray:
        with self._lock:
            pending, self._pending = self._pending, None
        if pending is not None:
            # Only this worker thread renders, so the signal can change between blocks;
            # the phase of 1× is kept, so the waveform stays continuous.
            phase = self._signal.orders[1.0][1]
            self._signal.orders[1.0] = (float(pending.imbalance_g), phase)
            self._signal.noise_g_rms = float(pending.noise_g)
        return self._stream.read(int(n))


class ReplaySource(PacedSource):
    """A recording replayed at its own sample rate in real time.

    Parameters
    ----------
    recording : Recording
    channel : int
        Channel replayed (0-based).
    loop : bool
        Start again at the end; otherwise the source finishes.
    description : str, optional
        Default: ``"replay of <recording.source>"``.
    """

    kind = "replay"

    def __init__(self, recording: Recording, channel: int = 0, *, loop: bool = True,
                 description: str | None = None) -> None:
        ch = recording.channel(int(channel))
        if ch.samples.size == 0:
            raise InputError(f"{recording.source}: channel {channel} holds no samples")
        if recording.tach_channel is not None and int(channel) == recording.tach_channel:
            raise InputError(f"{recording.source}: channel {channel} is the tachometer; "
                             "choose a vibration channel")
        samples = np.asarray(ch.samples, dtype=float)
        if not np.isfinite(samples).all():
            raise InputError(f"{recording.source}: channel {channel} holds NaN or infinite "
                             "values and cannot be replayed")
        super().__init__(recording.fs_hz, ch.unit,
                         description or f"replay of {recording.source or 'a recording'}")
        self._x = samples
        self._pos = 0
        self.loop = bool(loop)
        self._rpm = recording.rpm
        self._sens = ch.sensitivity_v_per_unit

    @property
    def rpm(self) -> float | None:
        return self._rpm

    @property
    def sensitivity_v_per_unit(self) -> float | None:
        return self._sens

    def skip(self, n: int) -> None:
        super().skip(n)
        self._pos = (self._pos + int(n)) % self._x.size if self.loop else self._pos + int(n)

    @property
    def position_s(self) -> float:
        """Where the replay is in the recording, s."""
        return self._pos / self.fs_hz

    def next_block(self, n: int) -> np.ndarray | None:
        parts, need, x = [], int(n), self._x
        while need > 0:
            if self._pos >= x.size:
                if not self.loop:
                    break
                self._pos = 0
            take = min(need, x.size - self._pos)
            parts.append(x[self._pos:self._pos + take])
            self._pos += take
            need -= take
        if not parts:
            return None
        return parts[0].copy() if len(parts) == 1 else np.concatenate(parts)
