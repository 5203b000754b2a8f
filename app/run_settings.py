"""What the run view computes and how it draws it: one settings object
(:class:`RunSettings`) and the panel that edits it.

The spectrum settings start from the point's own (``fmax_hz``, ``lines``, ``window``,
``averages``, ``overlap`` in the archive); the display choices (unit, scale, x axis,
log amplitude) and the envelope settings are remembered in the preferences.  Edits are
batched: the panel reports one change a short moment after the last edit.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, replace

from PySide6.QtCore import QTimer, Signal
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from engine.spectrum import MAX_LINES, MIN_LINES, SpectrumSettings
from engine.units import SI_UNITS, US_UNITS, quantity_of
from engine.windows import WINDOWS

from .context import Preferences

#: Units offered for the spectrum.
UNITS = ("mm/s", "in/s", "g", "um", "mil")
UNIT_LABELS = {"mm/s": "mm/s", "in/s": "in/s", "g": "g", "um": "µm", "mil": "mil"}
SCALES = {"rms": "RMS", "peak": "peak", "pp": "peak-to-peak"}
X_AXIS_LABELS = {"Hz": "Hz", "CPM": "CPM (60 × Hz)", "orders": "orders of shaft speed"}
LINE_CHOICES = (100, 200, 400, 800, 1600, 3200, 6400, 12800, 25600)
OVERLAP_CHOICES = (0.0, 0.25, 0.5, 0.67, 0.75)
#: Milliseconds of quiet after an edit before the change is reported.
BATCH_MS = 120


@dataclass(frozen=True)
class RunSettings:
    """Everything the run view needs to compute and draw a run.

    Attributes
    ----------
    window : str
    fmax_hz : float or None
        Spectrum Fmax, Hz (None: fs/2.56).
    lines : int
    averages : int
        Frames averaged; 0 uses every frame the run holds.
    overlap : float
        Fraction, 0 … 0.9.
    unit : str
        Spectrum unit (one of :data:`UNITS`).
    scale : str
        ``rms``, ``peak`` or ``pp``.
    x_axis : str
        ``Hz``, ``CPM`` or ``orders``.
    log_y : bool
        Logarithmic amplitude axis.
    env_fmax_hz : float
        Envelope spectrum Fmax, Hz.
    env_lines : int
    env_band_hz : (float, float) or None
        Demodulated band, Hz; None chooses it by the kurtogram.
    """

    window: str = "hann"
    fmax_hz: float | None = 1000.0
    lines: int = 1600
    averages: int = 0
    overlap: float = 0.5
    unit: str = "mm/s"
    scale: str = "rms"
    x_axis: str = "Hz"
    log_y: bool = False
    env_fmax_hz: float = 500.0
    env_lines: int = 800
    env_band_hz: tuple[float, float] | None = None

    def spectrum_settings(self) -> SpectrumSettings:
        return SpectrumSettings(fmax_hz=self.fmax_hz, lines=int(self.lines), window=self.window,
                                averages=self.averages or None, overlap=float(self.overlap),
                                scale=self.scale)

    def envelope_settings(self) -> SpectrumSettings:
        return SpectrumSettings(fmax_hz=float(self.env_fmax_hz), lines=int(self.env_lines),
                                window="hann", scale="peak")

    def compute_key(self) -> tuple:
        """The fields that change what is computed (not how it is drawn)."""
        return (self.window, self.fmax_hz, int(self.lines), int(self.averages),
                round(float(self.overlap), 4), self.unit, self.scale,
                float(self.env_fmax_hz), int(self.env_lines), self.env_band_hz)

    def with_point(self, props: dict) -> RunSettings:
        """These settings with the point's spectrum settings (window, Fmax, lines,
        averages, overlap) in place of the current ones."""
        fmax = props.get("fmax_hz")
        fmax = None if fmax is None or (isinstance(fmax, float) and math.isnan(fmax)) \
            else float(fmax)
        lines = int(props.get("lines") or self.lines)
        return replace(self, window=str(props.get("window") or self.window), fmax_hz=fmax,
                       lines=min(max(lines, MIN_LINES), MAX_LINES),
                       averages=max(int(props.get("averages") or 0), 0),
                       overlap=float(props.get("overlap", self.overlap)))


def unit_for_system(symbol: str, system: str) -> str:
    """The unit of the same quantity in the SI or US system (g stays g)."""
    table = US_UNITS if system == "US" else SI_UNITS
    return table.get(quantity_of(symbol), symbol)


def remembered(prefs: Preferences) -> RunSettings:
    """The display and envelope choices stored in the preferences."""
    d = RunSettings()
    unit = prefs.get("analysis/unit", "", str) or ("in/s" if prefs.units == "US" else "mm/s")
    if unit not in UNITS:
        unit = d.unit
    band = None
    if prefs.get("analysis/env_band_auto", True, bool) is False:
        lo = prefs.get("analysis/env_band_low_hz", 0.0, float)
        hi = prefs.get("analysis/env_band_high_hz", 0.0, float)
        band = (lo, hi) if 0 <= lo < hi else None
    scale = prefs.get("analysis/scale", d.scale, str)
    x_axis = prefs.get("analysis/x_axis", d.x_axis, str)
    return replace(d, unit=unit_for_system(unit, prefs.units),
                   scale=scale if scale in SCALES else d.scale,
                   x_axis=x_axis if x_axis in X_AXIS_LABELS else d.x_axis,
                   log_y=prefs.get("analysis/log_y", False, bool),
                   env_fmax_hz=prefs.get("analysis/env_fmax_hz", d.env_fmax_hz, float),
                   env_lines=prefs.get("analysis/env_lines", d.env_lines, int),
                   env_band_hz=band)


def remember(prefs: Preferences, s: RunSettings) -> None:
    """Store the display and envelope choices of ``s``."""
    prefs.set("analysis/unit", s.unit)
    prefs.set("analysis/scale", s.scale)
    prefs.set("analysis/x_axis", s.x_axis)
    prefs.set("analysis/log_y", bool(s.log_y))
    prefs.set("analysis/env_fmax_hz", float(s.env_fmax_hz))
    prefs.set("analysis/env_lines", int(s.env_lines))
    prefs.set("analysis/env_band_auto", s.env_band_hz is None)
    if s.env_band_hz is not None:
        prefs.set("analysis/env_band_low_hz", float(s.env_band_hz[0]))
        prefs.set("analysis/env_band_high_hz", float(s.env_band_hz[1]))


class SettingsPanel(QWidget):
    """Spectrum, display and envelope settings.

    Signals
    -------
    changed(object)
        The new :class:`RunSettings`, once per batch of edits.
    """

    changed = Signal(object)

    def __init__(self, settings: RunSettings, parent: QWidget | None = None):
        super().__init__(parent)
        self._settings = settings
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(BATCH_MS)
        self._timer.timeout.connect(self._emit)

        self.window = QComboBox()
        self.window.addItems(list(WINDOWS))
        self.window.setToolTip("Window applied to each frame (Hann for surveys, flat-top "
                               "for amplitude accuracy)")
        self.fmax = QDoubleSpinBox()
        self.fmax.setRange(0.0, 40000.0)
        self.fmax.setDecimals(0)
        self.fmax.setSuffix(" Hz")
        self.fmax.setSingleStep(100.0)
        self.fmax.setSpecialValueText("full band (fs/2.56)")   # 0: no resampling
        self.fmax.setToolTip("Highest frequency of the spectrum (Fmax)")
        self.lines = QComboBox()
        self.lines.addItems([str(n) for n in LINE_CHOICES])
        self.lines.setToolTip("Number of lines from 0 to Fmax; resolution = Fmax / lines")
        self.averages = QSpinBox()
        self.averages.setRange(0, 1000)
        self.averages.setSpecialValueText("all frames")
        self.averages.setToolTip("Frames averaged (all frames: as many as the run holds)")
        self.overlap = QComboBox()
        for o in OVERLAP_CHOICES:
            self.overlap.addItem(f"{o:.0%}", o)
        self.overlap.setToolTip("Share of a frame repeated in the next one")
        self.unit = QComboBox()
        for u in UNITS:
            self.unit.addItem(UNIT_LABELS[u], u)
        self.unit.setToolTip("Spectrum unit: velocity for severity, acceleration for "
                             "bearings and gears, displacement for slow shafts")
        self.scale = QComboBox()
        for k, label in SCALES.items():
            self.scale.addItem(label, k)
        self.scale.setToolTip("Amplitude scale of the spectrum lines")
        self.x_axis = QComboBox()
        for k, label in X_AXIS_LABELS.items():
            self.x_axis.addItem(label, k)
        self.x_axis.setToolTip("Frequency axis of the spectra")
        self.log_y = QCheckBox("Logarithmic amplitude")
        self.log_y.setToolTip("Show small lines beside large ones")
        self.env_fmax = QDoubleSpinBox()
        self.env_fmax.setRange(10.0, 5000.0)
        self.env_fmax.setDecimals(0)
        self.env_fmax.setSuffix(" Hz")
        self.env_fmax.setToolTip("Fmax of the envelope spectrum (a few harmonics of BPFI)")
        self.env_lines = QComboBox()
        self.env_lines.addItems([str(n) for n in LINE_CHOICES[:7]])
        self.env_lines.setToolTip("Lines of the envelope spectrum")
        self.env_auto = QCheckBox("Band by kurtogram")
        self.env_auto.setToolTip("Choose the demodulated band where the spectral kurtosis "
                                 "is largest; untick to set it by hand")
        self.env_lo = QDoubleSpinBox()
        self.env_hi = QDoubleSpinBox()
        for box in (self.env_lo, self.env_hi):
            box.setRange(0.0, 50000.0)
            box.setDecimals(0)
            box.setSuffix(" Hz")
            box.setToolTip("Demodulated band edges")

        spec = QGroupBox("Spectrum")
        f = QFormLayout(spec)
        f.addRow("Window", self.window)
        f.addRow("Fmax", self.fmax)
        f.addRow("Lines", self.lines)
        f.addRow("Averages", self.averages)
        f.addRow("Overlap", self.overlap)
        show = QGroupBox("Display")
        f = QFormLayout(show)
        f.addRow("Unit", self.unit)
        f.addRow("Scale", self.scale)
        f.addRow("X axis", self.x_axis)
        f.addRow(self.log_y)
        env = QGroupBox("Envelope")
        f = QFormLayout(env)
        f.addRow("Fmax", self.env_fmax)
        f.addRow("Lines", self.env_lines)
        f.addRow(self.env_auto)
        band = QHBoxLayout()
        band.addWidget(self.env_lo)
        band.addWidget(self.env_hi)
        f.addRow("Band", band)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(2, 2, 2, 2)
        for g in (spec, show, env):
            lay.addWidget(g)
        lay.addStretch(1)

        self.set_settings(settings)
        for w in (self.window, self.lines, self.overlap, self.unit, self.scale, self.x_axis,
                  self.env_lines):
            w.currentIndexChanged.connect(self._edited)
        for w in (self.fmax, self.averages, self.env_fmax, self.env_lo, self.env_hi):
            w.valueChanged.connect(self._edited)
        for w in (self.log_y, self.env_auto):
            w.toggled.connect(self._edited)

    def settings(self) -> RunSettings:
        return self._settings

    def set_settings(self, s: RunSettings) -> None:
        """Show ``s`` without reporting a change."""
        self._settings = s
        widgets = (self.window, self.fmax, self.lines, self.averages, self.overlap, self.unit,
                   self.scale, self.x_axis, self.log_y, self.env_fmax, self.env_lines,
                   self.env_auto, self.env_lo, self.env_hi)
        for w in widgets:
            w.blockSignals(True)
        try:
            self.window.setCurrentText(s.window)
            self.fmax.setValue(s.fmax_hz or 0.0)
            self._choose(self.lines, s.lines)
            self.averages.setValue(int(s.averages))
            i = min(range(len(OVERLAP_CHOICES)), key=lambda k: abs(OVERLAP_CHOICES[k] - s.overlap))
            if abs(OVERLAP_CHOICES[i] - s.overlap) > 1e-3:
                self.overlap.addItem(f"{s.overlap:.0%}", float(s.overlap))
                i = self.overlap.count() - 1
            self.overlap.setCurrentIndex(i)
            self.unit.setCurrentIndex(max(self.unit.findData(s.unit), 0))
            self.scale.setCurrentIndex(max(self.scale.findData(s.scale), 0))
            self.x_axis.setCurrentIndex(max(self.x_axis.findData(s.x_axis), 0))
            self.log_y.setChecked(bool(s.log_y))
            self.env_fmax.setValue(float(s.env_fmax_hz))
            self._choose(self.env_lines, s.env_lines)
            self.env_auto.setChecked(s.env_band_hz is None)
            lo, hi = s.env_band_hz or (0.0, 0.0)
            self.env_lo.setValue(lo)
            self.env_hi.setValue(hi)
            self.env_lo.setEnabled(s.env_band_hz is not None)
            self.env_hi.setEnabled(s.env_band_hz is not None)
        finally:
            for w in widgets:
                w.blockSignals(False)

    @staticmethod
    def _choose(box: QComboBox, value: int) -> None:
        i = box.findText(str(int(value)))
        if i < 0:
            box.addItem(str(int(value)))
            i = box.count() - 1
        box.setCurrentIndex(i)

    def show_band(self, band_hz: tuple[float, float] | None) -> None:
        """Show the band the kurtogram chose (while the band is automatic)."""
        if band_hz is None or not self.env_auto.isChecked():
            return
        for box, v in ((self.env_lo, band_hz[0]), (self.env_hi, band_hz[1])):
            box.blockSignals(True)
            box.setValue(v)
            box.blockSignals(False)

    def read(self) -> RunSettings:
        """The settings the widgets show now."""
        auto = self.env_auto.isChecked()
        self.env_lo.setEnabled(not auto)
        self.env_hi.setEnabled(not auto)
        band = None if auto else (self.env_lo.value(), self.env_hi.value())
        fmax = self.fmax.value()
        return replace(self._settings, window=self.window.currentText(),
                       fmax_hz=fmax if fmax > 0 else None, lines=int(self.lines.currentText()),
                       averages=self.averages.value(), overlap=float(self.overlap.currentData()),
                       unit=self.unit.currentData(), scale=self.scale.currentData(),
                       x_axis=self.x_axis.currentData(), log_y=self.log_y.isChecked(),
                       env_fmax_hz=self.env_fmax.value(), env_lines=int(self.env_lines.currentText()),
                       env_band_hz=band)

    def _edited(self, *_args) -> None:
        self._timer.start()

    def flush(self) -> None:
        """Report a pending edit now (tests, and before the view closes)."""
        if self._timer.isActive():
            self._timer.stop()
            self._emit()

    def _emit(self) -> None:
        new = self.read()
        if new != self._settings:
            self._settings = new
            self.changed.emit(new)

    def as_dict(self) -> dict:
        return asdict(self._settings)
