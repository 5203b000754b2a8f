"""Spectrum cursors: single (frequency, amplitude, order), harmonic (lines at the
harmonics of a fundamental) and sideband (a centre and a spacing).

A cursor's positions are kept in Hz; the lines are drawn through the plot's
:class:`app.plots.XAxis`.  Releasing a dragged line snaps it to the largest line within
three lines of where it was dropped, so a cursor lands on the peak, not beside it.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt

from .context import Palette
from .plots import XAxis, nearest_line

MODES = ("off", "single", "harmonic", "sideband")
#: Most harmonic lines drawn by the harmonic cursor (up to Fmax).
MAX_HARMONICS = 10
#: Sideband pairs drawn by the sideband cursor.
SIDEBAND_PAIRS = 3
#: Lines either side searched when snapping to a peak.
SNAP_LINES = 3


class CursorTool:
    """The cursor of one spectrum plot.

    Parameters
    ----------
    plot : pg.PlotWidget
    palette : Palette
    readout : callable(str)
        Receives the readout text whenever a cursor moves (empty when off).
    describe : callable(float) -> str, optional
        What lies at a frequency in Hz (for example the nearest source marker), added
        to the single cursor's readout when not empty.
    """

    def __init__(self, plot: pg.PlotWidget, palette: Palette, readout: Callable[[str], None],
                 describe: Callable[[float], str] | None = None):
        self.plot = plot
        self.palette = palette
        self._readout = readout
        self._describe = describe
        self.mode = "off"
        self.axis = XAxis()
        self.frequency_hz = np.zeros(0)
        self.amplitude = np.zeros(0)
        self.unit_label = ""
        self.hz = 0.0            # single position, fundamental or sideband centre, Hz
        self.spacing_hz = 0.0    # sideband spacing, Hz
        self._lines: list[pg.InfiniteLine] = []
        self._moving = False

    # -- data ---------------------------------------------------------------------------
    def set_data(self, frequency_hz: np.ndarray, amplitude: np.ndarray, unit_label: str) -> None:
        """The spectrum the cursor reads (linear amplitude, Hz axis)."""
        self.frequency_hz = np.asarray(frequency_hz, dtype=float)
        self.amplitude = np.asarray(amplitude, dtype=float)
        self.unit_label = unit_label
        self._draw()

    def set_axis(self, axis: XAxis) -> None:
        self.axis = axis
        self._draw()

    def set_mode(self, mode: str) -> None:
        """``off``, ``single``, ``harmonic`` or ``sideband``; a new cursor starts on the
        largest peak (the sideband spacing at the shaft speed, else 1/20 of the span)."""
        if mode not in MODES:
            raise ValueError(f"cursor mode must be one of {', '.join(MODES)}, got {mode!r}")
        self.mode = mode
        if mode != "off" and self.frequency_hz.size:
            if not self.hz:
                start = 3 if self.frequency_hz.size > 3 else 0
                self.hz = float(self.frequency_hz[start + int(np.argmax(self.amplitude[start:]))])
            if not self.spacing_hz:
                span = float(self.frequency_hz[-1])
                self.spacing_hz = float(self.axis.shaft_hz or span / 20.0)
        self._draw()

    def place(self, hz: float, spacing_hz: float | None = None) -> None:
        """Put the cursor at ``hz`` (and the sideband spacing), without snapping."""
        self.hz = float(hz)
        if spacing_hz is not None:
            self.spacing_hz = float(spacing_hz)
        self._draw()

    # -- drawing ------------------------------------------------------------------------
    def _clear(self) -> None:
        for line in self._lines:
            self.plot.removeItem(line)
        self._lines = []

    def _line(self, hz: float, *, movable: bool, dotted: bool = False, label: str = ""
              ) -> pg.InfiniteLine:
        colour = self.palette.ui("cursor")
        pen = pg.mkPen(colour, width=2 if movable else 1,
                       style=Qt.PenStyle.DotLine if dotted else Qt.PenStyle.SolidLine)
        line = pg.InfiniteLine(pos=self.axis.to_x(hz), angle=90, pen=pen, movable=movable,
                               hoverPen=pg.mkPen(colour, width=3))
        if label:
            pg.InfLineLabel(line, text=label, position=0.05, color=colour,
                            anchors=[(0, 0), (0, 0)])
        line.setZValue(20)
        self.plot.addItem(line, ignoreBounds=True)
        self._lines.append(line)
        return line

    def _draw(self) -> None:
        self._clear()
        if self.mode == "off" or self.frequency_hz.size == 0:
            self._readout("")
            return
        fmax = float(self.frequency_hz[-1])
        main = self._line(self.hz, movable=True, label="cursor" if self.mode == "single"
                          else "1×" if self.mode == "harmonic" else "centre")
        main.setToolTip("Drag the cursor; it snaps to the nearest peak when released")
        main.sigPositionChanged.connect(lambda ln: self._moved_main(ln))
        main.sigPositionChangeFinished.connect(lambda ln: self._released_main(ln))
        if self.mode == "harmonic":
            for k in range(2, MAX_HARMONICS + 1):
                if k * self.hz > fmax:
                    break
                self._line(k * self.hz, movable=False, dotted=True, label=f"{k}×")
        elif self.mode == "sideband":
            sb = self._line(self.hz + self.spacing_hz, movable=True, dotted=True, label="+1")
            sb.setToolTip("Drag to set the sideband spacing")
            sb.sigPositionChanged.connect(lambda ln: self._moved_spacing(ln))
            for k in range(1, SIDEBAND_PAIRS + 1):
                for sign in (-1, 1):
                    if sign == 1 and k == 1:
                        continue
                    f = self.hz + sign * k * self.spacing_hz
                    if 0.0 < f <= fmax:
                        self._line(f, movable=False, dotted=True,
                                   label=f"{'+' if sign > 0 else '−'}{k}")
        self._readout(self.text())

    def _moved_main(self, line: pg.InfiniteLine) -> None:
        if self._moving:
            return
        self.hz = max(0.0, self.axis.to_hz(line.value()))
        self._redraw_dependants()

    def _released_main(self, line: pg.InfiniteLine) -> None:
        self.hz = self.snap(self.axis.to_hz(line.value()))
        self._draw()

    def _moved_spacing(self, line: pg.InfiniteLine) -> None:
        self.spacing_hz = max(abs(self.axis.to_hz(line.value()) - self.hz), 1e-6)
        self._redraw_dependants()

    def _redraw_dependants(self) -> None:
        """Move the fixed lines with a dragged one (the dragged one keeps its drag)."""
        self._moving = True
        try:
            fmax = float(self.frequency_hz[-1])
            if self.mode == "harmonic":
                fixed = [k * self.hz for k in range(2, MAX_HARMONICS + 1) if k * self.hz <= fmax]
                moving = self._lines[1:]
            elif self.mode == "sideband":
                fixed = [self.hz + s * k * self.spacing_hz
                         for k in range(1, SIDEBAND_PAIRS + 1) for s in (-1, 1)
                         if not (s == 1 and k == 1)
                         and 0.0 < self.hz + s * k * self.spacing_hz <= fmax]
                moving = self._lines[2:]
                self._lines[1].blockSignals(True)
                self._lines[1].setValue(self.axis.to_x(self.hz + self.spacing_hz))
                self._lines[1].blockSignals(False)
            else:
                fixed, moving = [], []
            if len(fixed) != len(moving):   # the number of lines up to Fmax changed
                self._draw()
                return
            for line, f in zip(moving, fixed):
                line.setValue(self.axis.to_x(f))
        finally:
            self._moving = False
        self._readout(self.text())

    # -- reading ------------------------------------------------------------------------
    def snap(self, hz: float) -> float:
        """The frequency of the largest line within :data:`SNAP_LINES` of ``hz``."""
        f = self.frequency_hz
        if f.size < 2:
            return float(hz)
        i = int(np.clip(np.searchsorted(f, hz), 0, f.size - 1))
        lo, hi = max(0, i - SNAP_LINES), min(f.size, i + SNAP_LINES + 1)
        return float(f[lo + int(np.argmax(self.amplitude[lo:hi]))])

    def amplitude_at(self, hz: float) -> tuple[float, float]:
        """(line frequency, amplitude) of the spectrum line nearest ``hz``."""
        return nearest_line(self.frequency_hz, self.amplitude, hz)

    def text(self) -> str:
        """The readout of the current cursor."""
        if self.mode == "off" or self.frequency_hz.size == 0:
            return ""
        u = self.unit_label
        f, a = self.amplitude_at(self.hz)
        if self.mode == "single":
            what = self._describe(f) if self._describe is not None else ""
            return f"Cursor {self.axis.text(f)} — {a:.4g} {u}" + (f" — {what}" if what else "")
        if self.mode == "harmonic":
            fmax = float(self.frequency_hz[-1])
            parts = [f"{k}× {self.amplitude_at(k * self.hz)[1]:.3g}"
                     for k in range(1, MAX_HARMONICS + 1) if k * self.hz <= fmax]
            return f"Harmonics of {self.axis.text(self.hz)} ({u}): " + ", ".join(parts)
        lo = self.amplitude_at(self.hz - self.spacing_hz)[1]
        hi = self.amplitude_at(self.hz + self.spacing_hz)[1]
        spacing = f"{self.spacing_hz:.2f} Hz"
        if self.axis.shaft_hz:
            spacing += f" ({self.spacing_hz / self.axis.shaft_hz:.2f}×)"
        return (f"Sidebands around {self.axis.text(self.hz)} ({a:.3g} {u}), spacing "
                f"{spacing}: −1 {lo:.3g}, +1 {hi:.3g}")

    def positions_hz(self) -> list[float]:
        """Frequencies of every cursor line drawn now, Hz."""
        return [self.axis.to_hz(line.value()) for line in self._lines]
