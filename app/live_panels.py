"""The live view's controls: the source picker with one page per source, the spectrum
and display settings, and the keep bar.

Each panel turns its widgets into one settings object (``MachineSettings``,
``LiveSettings``) and says when it changed; the view decides what to do with it.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QStandardItemModel
from PySide6.QtWidgets import (QButtonGroup, QCheckBox, QComboBox, QDoubleSpinBox, QFileDialog,
                               QFormLayout, QGroupBox, QHBoxLayout, QLabel, QLineEdit,
                               QPushButton, QRadioButton, QSizePolicy, QSlider, QSpinBox, QStackedWidget,
                               QVBoxLayout, QWidget)

from engine.errors import InputError
from engine.io import SUFFIXES, read_recording
from engine.units import SI_UNITS, US_UNITS, quantity_of, unit
from engine.windows import WINDOWS

from .live_soundcard import (InputDevice, SoundCardSource, SoundCardStatus, device_rates,
                             input_devices)
from .live_sources import LiveSource, MachineSettings, ReplaySource, SimulatedSource
from .live_spectrum import AVERAGING, LINES_CHOICES, LiveSettings, fmax_choices

SOURCES = (("simulated", "Simulated machine"), ("sound card", "Sound card / USB audio"),
           ("replay", "Recording (replay)"))
SIM_RATES_HZ = (25600.0, 51200.0)
#: How the windows are named on screen (after the people who published them).
WINDOW_NAMES = {"rectangular": "rectangular", "hann": "Hann", "hamming": "Hamming",
                "flat-top": "flat-top (HFT95)", "blackman-harris": "Blackman-Harris"}


def _combo(items, current=None) -> QComboBox:
    box = QComboBox()
    for text, data in items:
        box.addItem(text, data)
    if current is not None:
        i = box.findData(current)
        box.setCurrentIndex(max(i, 0))
    return box


class SimulatedPage(QWidget):
    """Sample rate and the simulated machine's sliders."""

    changed = Signal()       # a slider moved: the running machine follows
    rate_changed = Signal()  # a new sample rate: a new source is needed

    #: slider name → (label, lowest, highest, step, unit text, MachineSettings field)
    SLIDERS = {
        "rpm": ("Speed", 300, 3600, 10, "rpm", "rpm"),
        "imbalance": ("1× level (imbalance)", 0.0, 1.0, 0.01, "g peak", "imbalance_g"),
        "fault": ("Outer-race fault", 0.0, 1.0, 0.01, "", "fault_level"),
        "noise": ("Noise", 0.0, 0.2, 0.002, "g RMS", "noise_g"),
    }

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        form = QFormLayout(self)
        form.setContentsMargins(0, 0, 0, 0)
        self.rate = _combo([(f"{r / 1000:g} kHz", r) for r in SIM_RATES_HZ])
        self.rate.currentIndexChanged.connect(lambda *_: self.rate_changed.emit())
        form.addRow("Sample rate", self.rate)
        self.sliders: dict[str, QSlider] = {}
        self._labels: dict[str, QLabel] = {}
        start = MachineSettings()
        for key, (text, lo, hi, step, _u, fld) in self.SLIDERS.items():
            s = QSlider(Qt.Orientation.Horizontal)
            s.setRange(0, int(round((hi - lo) / step)))
            s.setValue(int(round((getattr(start, fld) - lo) / step)))
            s.setObjectName(f"live-{key}")
            label = QLabel()
            label.setMinimumWidth(84)
            label.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            s.valueChanged.connect(self._moved)
            row = QHBoxLayout()
            row.addWidget(s, 1)
            row.addWidget(label)
            form.addRow(text, row)
            self.sliders[key], self._labels[key] = s, label
        self._moved()

    def value(self, key: str) -> float:
        _t, lo, _hi, step, _u, _f = self.SLIDERS[key]
        return lo + step * self.sliders[key].value()

    def set_value(self, key: str, value: float) -> None:
        _t, lo, _hi, step, _u, _f = self.SLIDERS[key]
        self.sliders[key].setValue(int(round((value - lo) / step)))

    def _moved(self, *_args) -> None:
        for key, (_t, _lo, _hi, _s, u, _f) in self.SLIDERS.items():
            v = self.value(key)
            text = f"{v * 100:.0f} %" if key == "fault" else (
                f"{v:.0f} {u}" if key == "rpm" else f"{v:.3g} {u}")
            self._labels[key].setText(text)
        self.changed.emit()

    def settings(self) -> MachineSettings:
        return MachineSettings(rpm=self.value("rpm"), imbalance_g=self.value("imbalance"),
                               fault_level=self.value("fault"), noise_g=self.value("noise"))

    def fs_hz(self) -> float:
        return float(self.rate.currentData())

    def unit(self) -> str:
        return "g"

    def make_source(self) -> SimulatedSource:
        return SimulatedSource(self.settings(), self.fs_hz())


class SoundCardPage(QWidget):
    """Device, sample rate, channel and the sensor's calibration."""

    rate_changed = Signal()

    def __init__(self, status: SoundCardStatus, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.status = status
        box = QVBoxLayout(self)
        box.setContentsMargins(0, 0, 0, 0)
        self.reason = QLabel(status.reason)
        self.reason.setWordWrap(True)
        self.reason.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.reason.setVisible(not status.available)
        box.addWidget(self.reason)
        form = QFormLayout()
        box.addLayout(form)
        self.device = QComboBox()
        self.rate = QComboBox()
        self.channel = QSpinBox()
        self.channel.setRange(1, 1)
        self.sensitivity = QDoubleSpinBox()
        self.sensitivity.setRange(0.01, 100000.0)
        self.sensitivity.setDecimals(2)
        self.sensitivity.setValue(100.0)
        self.sensitivity.setSuffix(" mV/g")
        self.full_scale = QDoubleSpinBox()
        self.full_scale.setRange(0.001, 100.0)
        self.full_scale.setDecimals(3)
        self.full_scale.setValue(1.0)
        self.full_scale.setSuffix(" V")
        self.full_scale.setToolTip("Input voltage (peak) that reads full scale on the card; "
                                   "measure it once with a known signal.")
        form.addRow("Device", self.device)
        form.addRow("Sample rate", self.rate)
        form.addRow("Channel", self.channel)
        form.addRow("Sensitivity", self.sensitivity)
        form.addRow("Full scale", self.full_scale)
        self._devices: list[InputDevice] = []
        for w in (self.device, self.rate, self.channel, self.sensitivity, self.full_scale):
            w.setEnabled(status.available)
        if status.available:
            self._devices = input_devices(status.module)
            for d in self._devices:
                self.device.addItem(f"{d.name} ({d.channels} in)", d.index)
            if not self._devices:
                self.reason.setText("No sound-card input was found: connect an audio "
                                    "interface, then restart Shaftwatch.")
                self.reason.setVisible(True)
            self.device.currentIndexChanged.connect(self._device_changed)
            self.rate.currentIndexChanged.connect(lambda *_: self.rate_changed.emit())
            self._device_changed()

    def _device_changed(self, *_args) -> None:
        dev = self.current_device()
        self.rate.blockSignals(True)
        self.rate.clear()
        if dev is not None:
            for r in device_rates(self.status.module, dev):
                self.rate.addItem(f"{r:g} Hz", r)
            self.channel.setRange(1, max(1, dev.channels))
        self.rate.blockSignals(False)
        self.rate_changed.emit()

    def current_device(self) -> InputDevice | None:
        i = self.device.currentIndex()
        return self._devices[i] if 0 <= i < len(self._devices) else None

    def fs_hz(self) -> float | None:
        r = self.rate.currentData()
        return float(r) if r is not None else None

    def unit(self) -> str:
        return "g"  # converted with the sensitivity

    def make_source(self) -> SoundCardSource:
        dev = self.current_device()
        if not self.status.available or dev is None:
            raise InputError(self.reason.text() or "sound card: no input device")
        return SoundCardSource(self.status.module, dev.index, self.fs_hz(),
                               self.channel.value() - 1,
                               sensitivity_mv_per_g=self.sensitivity.value(),
                               full_scale_v=self.full_scale.value(), device_name=dev.name)


class ReplayPage(QWidget):
    """A recording file, or a run of the archive at the view's point, replayed."""

    rate_changed = Signal()
    load_failed = Signal(str)

    def __init__(self, ctx, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.ctx = ctx
        form = QFormLayout(self)
        form.setContentsMargins(0, 0, 0, 0)
        self.from_file = QRadioButton("File")
        self.from_run = QRadioButton("Run at the point")
        group = QButtonGroup(self)
        group.addButton(self.from_file)
        group.addButton(self.from_run)
        self.from_file.setChecked(True)
        self.path = QLineEdit()
        self.path.setPlaceholderText("WAV, MAT, CSV or TSV recording")
        browse = QPushButton("Browse…")
        browse.clicked.connect(self._browse)
        row = QHBoxLayout()
        row.addWidget(self.path, 1)
        row.addWidget(browse)
        self.run = QComboBox()
        self.channel = QSpinBox()
        self.channel.setRange(1, 1)
        self.loop = QCheckBox("Start again at the end")
        self.loop.setChecked(True)
        self.info = QLabel("")  # one short line: a stacked page cannot wrap text well
        form.addRow(self.from_file)
        form.addRow(row)
        form.addRow(self.from_run)
        form.addRow(self.run)
        form.addRow("Channel", self.channel)
        form.addRow(self.loop)
        form.addRow(self.info)
        self.recording = None
        self._loaded_key = None
        self.path.editingFinished.connect(self._load)
        self.from_file.toggled.connect(lambda *_: self._load())
        self.run.currentIndexChanged.connect(lambda *_: self._load())

    def set_file(self, path: str) -> None:
        """Replay this recording file (read at once, so that its rate is known)."""
        self.path.setText(str(path))
        if self.from_file.isChecked():
            self._load()
        else:
            self.from_file.setChecked(True)

    def _browse(self) -> None:
        pattern = " ".join(f"*{s}" for s in SUFFIXES)
        name, _ = QFileDialog.getOpenFileName(self, "Recording to replay", self.path.text(),
                                              f"Recordings ({pattern});;All files (*)")
        if name:
            self.set_file(name)

    def set_runs(self, rows, selected: str | None = None) -> None:
        """List the runs (catalogue rows) of the view's point, newest first;
        ``selected`` (a run id) is chosen and replay switched to runs."""
        keep = selected or self.run.currentData()
        self.run.blockSignals(True)
        self.run.clear()
        for r in reversed(rows):
            self.run.addItem(f"{r.taken:%Y-%m-%d %H:%M} · {r.run_id[:10]}", r.run_id)
        if not rows:
            self.run.addItem("(no runs at this point)", None)
        i = self.run.findData(keep) if keep else -1
        if i >= 0:
            self.run.setCurrentIndex(i)
        self.run.blockSignals(False)
        if selected and i >= 0:
            self.from_run.setChecked(True)
        if self.from_run.isChecked():
            self._load()

    def _load(self) -> None:
        """Read the chosen recording now, so that its sample rate is known."""
        key = ("file", self.path.text().strip()) if self.from_file.isChecked() else \
            ("run", self.run.currentData())
        if key == self._loaded_key or not key[1]:
            return
        try:
            if key[0] == "file":
                rec = read_recording(key[1])
            else:
                rec, _info = self.ctx.archive().read_run(key[1])
        except Exception as exc:  # noqa: BLE001 - engine and file errors: the user's words
            self.recording, self._loaded_key = None, None
            self.info.setText("")
            self.load_failed.emit(str(exc))
            return
        self.recording, self._loaded_key = rec, key
        self.channel.setRange(1, len(rec.channels))
        names = ", ".join(c.name or f"{i + 1}" for i, c in enumerate(rec.channels))
        self.info.setText(f"{rec.duration_s:.3g} s at {rec.fs_hz:g} Hz; channels: {names}")
        self.rate_changed.emit()

    def fs_hz(self) -> float | None:
        return self.recording.fs_hz if self.recording is not None else None

    def unit(self) -> str:
        if self.recording is None:
            return "g"
        i = min(self.channel.value() - 1, len(self.recording.channels) - 1)
        return self.recording.channels[i].unit

    def make_source(self) -> ReplaySource:
        self._load()
        if self.recording is None:
            raise InputError("replay: choose a recording file or a run of the archive first")
        what = Path(self.recording.source).name if self._loaded_key[0] == "file" else \
            f"run {self._loaded_key[1][:10]}"
        return ReplaySource(self.recording, self.channel.value() - 1,
                            loop=self.loop.isChecked(), description=f"replay of {what}")


class SourcePanel(QGroupBox):
    """The source picker and the page of the chosen source."""

    kind_changed = Signal()

    def __init__(self, ctx, status: SoundCardStatus, parent: QWidget | None = None) -> None:
        super().__init__("Source", parent)
        box = QVBoxLayout(self)
        self.kind = _combo([(text, key) for key, text in SOURCES])
        box.addWidget(self.kind)
        self.pages = QStackedWidget()
        self.simulated = SimulatedPage()
        self.sound_card = SoundCardPage(status)
        self.replay = ReplayPage(ctx)
        for page in (self.simulated, self.sound_card, self.replay):
            self.pages.addWidget(page)
        box.addWidget(self.pages)
        self.sound_note = QLabel(status.reason)
        self.sound_note.setWordWrap(True)
        self.sound_note.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        font = self.sound_note.font()
        font.setPointSizeF(font.pointSizeF() * 0.9)
        self.sound_note.setFont(font)
        self.sound_note.setHidden(status.available)
        box.addWidget(self.sound_note)
        if not status.available:
            model: QStandardItemModel = self.kind.model()
            i = self.kind.findData("sound card")
            item = model.item(i)
            item.setEnabled(False)
            item.setText(f"{item.text()} (not available)")
            item.setToolTip(status.reason)
        self.kind.currentIndexChanged.connect(self._kind_changed)
        self._show_page(0)

    def _kind_changed(self, *_args) -> None:
        self._show_page(self.kind.currentIndex())
        self.kind_changed.emit()

    def _show_page(self, index: int) -> None:
        # Hidden pages ignore their size, so the box fits the page shown.
        for i in range(self.pages.count()):
            policy = QSizePolicy.Policy.Preferred if i == index else QSizePolicy.Policy.Ignored
            self.pages.widget(i).setSizePolicy(policy, policy)
        self.pages.setCurrentIndex(index)
        self.pages.adjustSize()

    def current_kind(self) -> str:
        return self.kind.currentData()

    def set_kind(self, kind: str) -> bool:
        """Choose a source; False when that source is not available."""
        i = self.kind.findData(kind)
        item = self.kind.model().item(i) if i >= 0 else None
        if item is None or not item.isEnabled():
            return False
        self.kind.setCurrentIndex(i)
        return True

    def page(self):
        return self.pages.currentWidget()

    def fs_hz(self) -> float | None:
        return self.page().fs_hz()

    def unit(self) -> str:
        """Unit of the samples the chosen source will deliver."""
        return self.page().unit()

    def make_source(self) -> LiveSource:
        return self.page().make_source()


class SpectrumPanel(QGroupBox):
    """Fmax, lines, window, averaging, scale and unit; the display's spans."""

    changed = Signal()

    OVERLAPS = (("auto", None), ("0 %", 0.0), ("50 %", 0.5), ("75 %", 0.75), ("90 %", 0.9))
    SCALES = (("peak", "peak"), ("RMS", "rms"), ("peak-to-peak", "pp"))
    WAVE_SPANS = (0.05, 0.1, 0.2, 0.5, 1.0)
    COLOUR_SPANS = (40, 60, 80, 100, 120)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Spectrum", parent)
        form = QFormLayout(self)
        self.fmax = QComboBox()
        self.lines = _combo([(f"{n}", n) for n in LINES_CHOICES], 800)
        self.window = _combo([(WINDOW_NAMES.get(name, name), name) for name in WINDOWS],
                             "hann")
        self.averaging = _combo([(a, a) for a in AVERAGING], "exponential")
        self.averages = QSpinBox()
        self.averages.setRange(1, 1000)
        self.averages.setValue(8)
        self.overlap = _combo(self.OVERLAPS)
        self.scale = _combo(self.SCALES, "peak")
        self.unit = QComboBox()
        self.wave_span = _combo([(f"{s * 1000:g} ms", s) for s in self.WAVE_SPANS], 0.2)
        self.colour_span = _combo([(f"{d} dB", float(d)) for d in self.COLOUR_SPANS], 80.0)
        for text, w in (("Fmax", self.fmax), ("Lines", self.lines), ("Window", self.window),
                        ("Averaging", self.averaging), ("Averages", self.averages),
                        ("Overlap", self.overlap), ("Amplitude", self.scale),
                        ("Unit", self.unit), ("Waveform span", self.wave_span),
                        ("Waterfall colours", self.colour_span)):
            form.addRow(text, w)
            signal = w.valueChanged if isinstance(w, QSpinBox) else w.currentIndexChanged
            signal.connect(lambda *_: self.changed.emit())
        self._fs: float | None = None
        self._wanted_fmax = 2500.0  # Hz, the first Fmax offered (nearest available)

    def set_rate(self, fs_hz: float | None) -> None:
        """Offer the Fmax values of a source at ``fs_hz`` (keeping the nearest)."""
        if fs_hz is None or fs_hz == self._fs:
            return
        old = self.fmax.currentData()
        self._fs = fs_hz
        choices = fmax_choices(fs_hz)
        self.fmax.blockSignals(True)
        self.fmax.clear()
        for f in choices:
            self.fmax.addItem(f"{f:g} Hz", f)
        want = old if old is not None else self._wanted_fmax
        best = min(range(len(choices)), key=lambda i: abs(choices[i] - want))
        self.fmax.setCurrentIndex(best)
        self.fmax.blockSignals(False)
        self.changed.emit()

    def set_fmax(self, fmax_hz: float) -> None:
        i = min(range(self.fmax.count()),
                key=lambda j: abs(self.fmax.itemData(j) - fmax_hz), default=-1)
        if i >= 0:
            self.fmax.setCurrentIndex(i)

    def set_units(self, source_unit: str, system: str) -> None:
        """Offer the source's unit and, for acceleration, velocity (SI or US)."""
        table = US_UNITS if system == "US" else SI_UNITS
        q = quantity_of(source_unit)
        symbols = [unit(source_unit).symbol]
        if q == "acceleration":
            symbols.append(table["velocity"])
        elif q == "velocity":
            symbols.append(table["displacement"])
        old = self.unit.currentData()
        self.unit.blockSignals(True)
        self.unit.clear()
        for s in symbols:
            self.unit.addItem(unit(s).label, s)
        self.unit.setCurrentIndex(max(0, self.unit.findData(old)))
        self.unit.blockSignals(False)

    def settings(self) -> LiveSettings:
        return LiveSettings(fmax_hz=self.fmax.currentData(), lines=self.lines.currentData(),
                            window=self.window.currentData(),
                            averaging=self.averaging.currentData(),
                            averages=self.averages.value(), overlap=self.overlap.currentData(),
                            scale=self.scale.currentData(), unit=self.unit.currentData())

    def remember(self, prefs) -> None:
        for key, w in (("lines", self.lines), ("window", self.window),
                       ("averaging", self.averaging), ("scale", self.scale),
                       ("overlap", self.overlap), ("fmax_hz", self.fmax)):
            prefs.set(f"live/{key}", w.currentData())
        prefs.set("live/averages", self.averages.value())

    def restore(self, prefs) -> None:
        for key, w in (("lines", self.lines), ("window", self.window),
                       ("averaging", self.averaging), ("scale", self.scale)):
            value = prefs.get(f"live/{key}")
            if value is not None:
                i = w.findData(type(w.currentData())(value))
                if i >= 0:
                    w.setCurrentIndex(i)
        ov = prefs.get("live/overlap")
        if ov not in (None, "", "None"):
            i = self.overlap.findData(float(ov))
            if i >= 0:
                self.overlap.setCurrentIndex(i)
        self.averages.setValue(prefs.get("live/averages", 8, int) or 8)
        self._wanted_fmax = prefs.get("live/fmax_hz", 2500.0, float) or 2500.0


class KeepBar(QGroupBox):
    """The point (for keeping and for the runs to replay) and the Keep button."""

    point_changed = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__("Keep as a run", parent)
        form = QFormLayout(self)
        self.point = QComboBox()
        self.point.setMinimumContentsLength(18)
        self.point.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.seconds = QSpinBox()
        self.seconds.setRange(1, 60)
        self.seconds.setValue(10)
        self.seconds.setSuffix(" s")
        self.button = QPushButton("Keep")
        self.button.setToolTip("Store the last seconds of signal as a run of the point")
        form.addRow("Point", self.point)
        form.addRow("Last", self.seconds)
        form.addRow(self.button)
        self.point.currentIndexChanged.connect(
            lambda *_: self.point_changed.emit(self.point.currentData() or ""))

    def set_points(self, paths: list[str], selected: str | None) -> None:
        current = selected or self.point.currentData()
        self.point.blockSignals(True)
        self.point.clear()
        if not paths:
            self.point.addItem("(the archive has no points)", None)
        for p in paths:
            self.point.addItem(p, p)
        i = self.point.findData(current) if current else -1
        self.point.setCurrentIndex(max(i, 0))
        self.point.blockSignals(False)
        self.button.setEnabled(bool(paths))
        self.point_changed.emit(self.point.currentData() or "")

    def current_point(self) -> str | None:
        return self.point.currentData()
