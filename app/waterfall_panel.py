"""The waterfall tab: a point's stored spectra stacked by date, as a cascade (offset
lines, the newest in front, each hiding the older ones behind it) or as a colour map
(one row per run, dB re the largest line), in Hz or in orders of each run's shaft
speed (:func:`engine.trends.spectra_by_date`).
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtWidgets import (
    QButtonGroup,
    QDoubleSpinBox,
    QHBoxLayout,
    QLabel,
    QRadioButton,
    QStackedWidget,
    QVBoxLayout,
    QWidget,
)

from engine.trends import Waterfall, spectra_by_date

from .context import AppContext
from .plots import make_plot, style_plot
from .point_panel import PointPanel
from .trend_data import date_text, display_unit

#: Dynamic range of the colour map, dB below the largest line (our choice: the noise
#: floor of a 1600-line Hann spectrum of a survey run sits 50–70 dB below its 1×).
MAP_RANGE_DB = 60.0
#: Row spacing of the cascade as a share of the median of the rows' largest lines.
CASCADE_SPACING = 0.45
#: Share of the spectra's power the default x range holds (the rest is shown on
#: request, "Up to").
CONTENT_SHARE = 0.995
#: Most date labels on the row axis (every k-th row is labelled beyond this).
MAX_ROW_LABELS = 24


def row_step(matrix: np.ndarray) -> float:
    """Vertical distance between cascade rows (amplitude unit): a share of the median
    of the rows' largest lines, so that the peaks of one row reach into the next ones."""
    with np.errstate(all="ignore"):
        tops = np.nanmax(np.where(np.isfinite(matrix), matrix, np.nan), axis=1) \
            if matrix.size else np.zeros(0)
    tops = tops[np.isfinite(tops) & (tops > 0)]
    return float(CASCADE_SPACING * np.median(tops)) if tops.size else 1.0


def to_db(matrix: np.ndarray, range_db: float = MAP_RANGE_DB) -> np.ndarray:
    """Amplitudes as dB re the largest finite one (20·log10 of the amplitude ratio),
    floored at ``-range_db``; NaN (above a run's Fmax) at the floor."""
    finite = np.isfinite(matrix)
    top = float(np.max(matrix[finite])) if finite.any() else 0.0
    if top <= 0:
        return np.full(matrix.shape, -range_db)
    with np.errstate(divide="ignore", invalid="ignore"):
        db = 20.0 * np.log10(np.where(finite, matrix, 0.0) / top)
    return np.clip(np.nan_to_num(db, nan=-range_db, neginf=-range_db), -range_db, 0.0)


def nice_ceil(x: float) -> float:
    """The smallest of 1, 2, 5 × 10^k at or above ``x`` (> 0)."""
    k = math.floor(math.log10(x))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0 ** k >= x * (1 - 1e-12):
            return m * 10.0 ** k
    return 10.0 ** (k + 1)


def content_limit(axis: np.ndarray, matrix: np.ndarray, share: float = CONTENT_SHARE) -> float:
    """Where the spectra's content ends: the lowest axis value below which ``share`` of
    the summed power (RMS² per line, all runs) lies, rounded up to 1, 2 or 5 × 10^k and
    at most the axis' end."""
    if axis.size < 2 or matrix.size == 0:
        return float(axis[-1]) if axis.size else 1.0
    power = np.nansum(np.where(np.isfinite(matrix), matrix, 0.0) ** 2, axis=0)
    total = float(power.sum())
    if total <= 0:
        return float(axis[-1])
    i = int(np.searchsorted(np.cumsum(power) / total, share))
    end = float(axis[min(i, axis.size - 1)])
    return min(nice_ceil(max(end, float(axis[1]))), float(axis[-1]))


def row_ticks(labels: list[str], positions: list[float]) -> list[list[tuple[float, str]]]:
    """Tick list for pyqtgraph: every row labelled up to :data:`MAX_ROW_LABELS` rows,
    else every k-th (the newest always)."""
    n = len(labels)
    k = max(1, math.ceil(n / MAX_ROW_LABELS))
    keep = [i for i in range(n) if (n - 1 - i) % k == 0]
    return [[(positions[i], labels[i]) for i in keep]]


class WaterfallPanel(PointPanel):
    """Spectra of one point by date.

    Attributes
    ----------
    waterfall : Waterfall or None
        The last result drawn.
    cascade_curves : list of pg.PlotCurveItem
        One per run, oldest first.
    image : pg.ImageItem
        The colour map: one row per run (oldest at the bottom), dB re the largest line.
    """

    job_title = "Read spectra by date"
    failure_text = "The spectra could not be read"

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(ctx, parent)
        self.waterfall: Waterfall | None = None
        self.cascade_curves: list[pg.PlotCurveItem] = []
        self._step = 1.0
        self._factor, self._unit = 1.0, ""
        pal = ctx.palette

        self.cascade_button = QRadioButton("Cascade", self)
        self.cascade_button.setToolTip("Spectra as offset lines, the newest in front")
        self.map_button = QRadioButton("Colour map", self)
        self.map_button.setToolTip("One row per run, colour = dB re the largest line")
        self.hz_button = QRadioButton("Hz", self)
        self.orders_button = QRadioButton("Orders", self)
        self.orders_button.setToolTip("Each run's spectrum in orders of its own shaft speed, "
                                      "so that speed-locked lines stay in one column")
        self._mode_group = QButtonGroup(self)
        self._axis_group = QButtonGroup(self)
        for b in (self.cascade_button, self.map_button):
            self._mode_group.addButton(b)
        for b in (self.hz_button, self.orders_button):
            self._axis_group.addButton(b)
        mode = ctx.prefs.get("waterfall/mode", "cascade", str)
        (self.map_button if mode == "map" else self.cascade_button).setChecked(True)
        orders = ctx.prefs.get("waterfall/orders", False, bool)
        (self.orders_button if orders else self.hz_button).setChecked(True)
        self.cascade_button.toggled.connect(self._mode_changed)
        self.orders_button.toggled.connect(self._axis_changed)
        self.upto_spin = QDoubleSpinBox(self)
        self.upto_spin.setDecimals(1)
        self.upto_spin.setRange(0.5, 1e6)
        self.upto_spin.setKeyboardTracking(False)
        self.upto_spin.setToolTip("Highest frequency (or order) shown; at first where "
                                  f"{100 * CONTENT_SHARE:g} % of the spectra's power ends")
        self.upto_spin.valueChanged.connect(self._upto_changed)
        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setWordWrap(True)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.readout = QLabel("", self)
        self.readout.setToolTip("The line under the mouse")

        controls = QHBoxLayout()
        controls.addWidget(QLabel("Show", self))
        controls.addWidget(self.cascade_button)
        controls.addWidget(self.map_button)
        controls.addSpacing(18)
        controls.addWidget(QLabel("Axis", self))
        controls.addWidget(self.hz_button)
        controls.addWidget(self.orders_button)
        controls.addSpacing(18)
        upto = QLabel("Up to", self)
        upto.setBuddy(self.upto_spin)
        controls.addWidget(upto)
        controls.addWidget(self.upto_spin)
        controls.addStretch(1)

        self.cascade_plot = make_plot(pal, title="Spectra by date", x_label="Frequency (Hz)",
                                      y_label="", tooltip="Each line is one run's velocity "
                                      "spectrum; the newest is in front (bottom)")
        self.map_plot = make_plot(pal, title="Spectra by date", x_label="Frequency (Hz)",
                                  y_label="Run", tooltip="One row per run, newest at the top")
        self.image = pg.ImageItem(axisOrder="row-major")
        self.map_plot.addItem(self.image)
        self.colour_bar = pg.ColorBarItem(values=(-MAP_RANGE_DB, 0.0), width=14,
                                          colorMap=pg.colormap.get("viridis"),
                                          label="dB re largest line", interactive=False)
        self.colour_bar.setImageItem(self.image, insert_in=self.map_plot.getPlotItem())
        self.stack = QStackedWidget(self)
        self.stack.addWidget(self.cascade_plot)
        self.stack.addWidget(self.map_plot)
        for plot in (self.cascade_plot, self.map_plot):
            plot.scene().sigMouseMoved.connect(lambda pos, p=plot: self._hover(p, pos))

        lay = QVBoxLayout(self)
        lay.addWidget(self.header)
        lay.addLayout(controls)
        lay.addWidget(self.stack, 1)
        lay.addWidget(self.readout)
        self._show_mode()

    # -- options ----------------------------------------------------------------------
    @property
    def orders(self) -> bool:
        return self.orders_button.isChecked()

    @property
    def mode(self) -> str:
        """``"cascade"`` or ``"map"``."""
        return "cascade" if self.cascade_button.isChecked() else "map"

    def set_mode(self, mode: str) -> None:
        (self.map_button if mode == "map" else self.cascade_button).setChecked(True)

    def set_orders(self, on: bool) -> None:
        (self.orders_button if on else self.hz_button).setChecked(True)

    def _mode_changed(self, _on: bool) -> None:
        self.ctx.prefs.set("waterfall/mode", self.mode)
        self._show_mode()

    def _show_mode(self) -> None:
        self.stack.setCurrentIndex(0 if self.mode == "cascade" else 1)

    def _axis_changed(self, _on: bool) -> None:
        self.ctx.prefs.set("waterfall/orders", self.orders)
        self.request()

    def _upto_changed(self, value: float) -> None:
        if self.waterfall is None or self.waterfall.axis.size == 0:
            return
        x0 = float(self.waterfall.axis[0])
        for plot in (self.cascade_plot, self.map_plot):
            plot.getPlotItem().setXRange(x0, value, padding=0)

    # -- the job ----------------------------------------------------------------------
    def job_fn(self):
        arc, point, orders = self.ctx.archive(), self.point, self.orders
        self.header.setText(f"<b>{point}</b> — reading the spectra…")

        def work(progress, cancel) -> Waterfall:
            progress(0, 1, "spectra by date")
            return spectra_by_date(arc, point, orders=orders)
        return work

    # -- drawing ----------------------------------------------------------------------
    def clear(self, text: str) -> None:
        self.waterfall = None
        self.header.setText(text)
        self.readout.setText("")
        self._clear_cascade()
        self.image.clear()

    def _clear_cascade(self) -> None:
        for c in self.cascade_curves:
            self.cascade_plot.removeItem(c)
        self.cascade_curves = []

    def draw(self, w: Waterfall) -> None:
        self.waterfall = w
        pal = self.ctx.palette
        for plot in (self.cascade_plot, self.map_plot):
            style_plot(plot, pal)
        self._factor, self._unit = display_unit(w.unit, self.ctx.prefs.units)
        x_label = "Order of shaft speed (×)" if w.axis_unit == "order" else "Frequency (Hz)"
        left = "; ".join(f"{d['run_id']}: {d['reason']}" for d in w.left_out)
        n = len(w.run_ids)
        head = (f"<b>{w.point}</b> — {n} runs"
                + (f", {date_text(w.times_s[0])} to {date_text(w.times_s[-1])}" if n else "")
                + f"; velocity spectra in {self._unit}")
        if left:
            head += f". Left out: {left}"
        self.header.setText(head)
        self._draw_cascade(w, x_label)
        self._draw_map(w, x_label)
        if w.axis.size:
            top = content_limit(w.axis, w.matrix)
            self.upto_spin.blockSignals(True)
            self.upto_spin.setSuffix(" ×" if w.axis_unit == "order" else " Hz")
            self.upto_spin.setMaximum(max(float(w.axis[-1]), 0.5))
            self.upto_spin.setValue(top)
            self.upto_spin.blockSignals(False)
            for plot in (self.cascade_plot, self.map_plot):
                plot.getPlotItem().setXRange(float(w.axis[0]), top, padding=0)

    def _row_labels(self, w: Waterfall) -> list[str]:
        pal = self.ctx.palette
        return [f"{date_text(t)} {pal.state_word(s)}" for t, s in zip(w.times_s, w.states)]

    def _draw_cascade(self, w: Waterfall, x_label: str) -> None:
        self._clear_cascade()
        pal = self.ctx.palette
        amp = w.matrix * self._factor
        n = amp.shape[0]
        self._step = step = row_step(amp)
        bg = pal.ui("background")
        positions = []
        for i in range(n):
            offset = (n - 1 - i) * step        # the newest (last) row at the bottom
            positions.append(offset)
            row = amp[i]
            ok = np.isfinite(row)
            curve = pg.PlotCurveItem(w.axis[ok], row[ok] + offset,
                                     pen=pg.mkPen(pal.state(w.states[i]), width=1.2),
                                     fillLevel=offset, brush=pg.mkBrush(bg))
            curve.setZValue(i)                  # newer rows are drawn over older ones
            self.cascade_plot.addItem(curve)
            self.cascade_curves.append(curve)
        item = self.cascade_plot.getPlotItem()
        item.setLabel("bottom", x_label)
        item.setLabel("left", f"Runs, newest in front (rows {step:.3g} {self._unit} apart)")
        item.getAxis("left").setTicks(row_ticks(self._row_labels(w), positions) if n else None)
        top = float(np.nanmax(amp)) if n and np.isfinite(amp).any() else 1.0
        item.setYRange(0.0, (n - 1) * step + top * 1.05, padding=0.02)

    def _draw_map(self, w: Waterfall, x_label: str) -> None:
        n, m = w.matrix.shape if w.matrix.ndim == 2 else (0, 0)
        item = self.map_plot.getPlotItem()
        item.setLabel("bottom", x_label)
        if n == 0 or m < 2:
            self.image.clear()
            return
        self.image.setImage(to_db(w.matrix), autoLevels=False, levels=(-MAP_RANGE_DB, 0.0))
        dx = float(w.axis[1] - w.axis[0])
        self.image.setRect(QRectF(float(w.axis[0]) - dx / 2, -0.5, m * dx, float(n)))
        self.colour_bar.setLevels((-MAP_RANGE_DB, 0.0))
        item.getAxis("left").setTicks(row_ticks(self._row_labels(w), list(range(n))))
        item.setYRange(-0.5, n - 0.5, padding=0)

    # -- readout ----------------------------------------------------------------------
    def _hover(self, plot: pg.PlotWidget, scene_pos: QPointF) -> None:
        w = self.waterfall
        if w is None or not w.run_ids or w.axis.size < 2:
            return
        vb = plot.getPlotItem().getViewBox()
        if not vb.sceneBoundingRect().contains(scene_pos):
            return
        p = vb.mapSceneToView(scene_pos)
        n = len(w.run_ids)
        if plot is self.map_plot:
            row = int(round(p.y()))
        else:
            row = n - 1 - int(round(p.y() / self._step)) if self._step > 0 else n - 1
        row = min(max(row, 0), n - 1)
        col = int(np.clip(np.searchsorted(w.axis, p.x()), 1, w.axis.size - 1))
        if abs(w.axis[col - 1] - p.x()) <= abs(w.axis[col] - p.x()):
            col -= 1
        x = float(w.axis[col])
        shaft_hz = float(w.rpm[row]) / 60.0 if math.isfinite(w.rpm[row]) else math.nan
        if w.axis_unit == "order":
            where = f"{x:.2f}×" + (f" ({x * shaft_hz:.2f} Hz)" if math.isfinite(shaft_hz) else "")
        else:
            where = f"{x:.2f} Hz" + (f" ({x / shaft_hz:.2f}×)" if math.isfinite(shaft_hz) else "")
        value = float(w.matrix[row, col]) * self._factor
        shown = f"{value:.3g} {self._unit}" if math.isfinite(value) else "above Fmax"
        self.readout.setText(f"{where} · run of {date_text(w.times_s[row])} "
                             f"({self.ctx.palette.state_word(w.states[row])}) · {shown}")
