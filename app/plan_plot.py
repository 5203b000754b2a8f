"""Alarm bands drawn on a spectrum so that they can be edited by hand: each band is a
draggable region (its edges) with two draggable level lines (alert and danger) drawn
only across the band.

The layer works in the plot's units (Hz on x; the spectrum's amplitude unit on y) and
reports what the user did through signals when a drag ends (``sigRegionChangeFinished``,
``sigPositionChangeFinished``), not on every pixel of it; the editor converts to the
band's own basis, unit and scale.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QObject, QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QColor, QFont

from .context import Palette

LEVELS = ("alert", "danger")
#: Smallest level a line can be dragged to (levels must be positive).
MIN_LEVEL = 1e-6
#: Shortest level line drawn, pixels (a narrow band over a wide range stays grabbable).
MIN_GRAB_PX = 26.0


@dataclass(frozen=True)
class DrawnBand:
    """A band as drawn: its index in the plan, edges in Hz, levels in the plot's unit
    (None when the band's levels are in another quantity and cannot be drawn)."""

    index: int
    name: str
    low_hz: float
    high_hz: float
    alert: float | None
    danger: float | None
    tooltip: str = ""
    selected: bool = False

    @property
    def has_levels(self) -> bool:
        return self.alert is not None and self.danger is not None


class LevelLine(pg.InfiniteLine):
    """A horizontal, draggable line drawn only between two x values (a band's edges).

    Dragging moves it up and down only; ``sigPositionChangeFinished`` fires when a drag
    ends, as for any InfiniteLine.
    """

    def __init__(self, y: float, x_range: tuple[float, float], *, pen, hover_pen,
                 band: int, level: str):
        self.x_range = (float(x_range[0]), float(x_range[1]))
        self.band = band
        self.level = level
        super().__init__(pos=y, angle=0, movable=True, pen=pen, hoverPen=hover_pen,
                         bounds=(MIN_LEVEL, None))

    def set_x_range(self, lo: float, hi: float) -> None:
        self.x_range = (float(lo), float(hi))
        self._boundingRect = None
        self.prepareGeometryChange()
        self.update()

    def setPos(self, pos) -> None:  # noqa: N802 - pyqtgraph's name
        # A drag hands a QPointF that also moves in x; a level only moves in y.
        if isinstance(pos, QPointF):
            pos = pos.y()
        elif isinstance(pos, (list, tuple, np.ndarray)) and np.ndim(pos):
            pos = pos[1]
        super().setPos(pos)

    def _computeBoundingRect(self) -> QRectF:  # noqa: N802 - pyqtgraph's name
        vr = self.viewRect()
        vb = self.getViewBox()
        if vr is not None and vr.width() > 0:
            lo = (self.x_range[0] - vr.left()) / vr.width()
            hi = (self.x_range[1] - vr.left()) / vr.width()
            px = vb.width() if vb is not None else 0.0
            if px > 0 and (hi - lo) * px < MIN_GRAB_PX:
                # A narrow band seen over a wide range: keep the line long enough to
                # see and to grab, centred on the band.
                half = 0.5 * MIN_GRAB_PX / px
                mid = 0.5 * (lo + hi)
                lo, hi = mid - half, mid + half
            self.span = (min(max(lo, 0.0), 1.0), min(max(hi, 0.0), 1.0))
        return super()._computeBoundingRect()


class BandRegion(pg.LinearRegionItem):
    """A band's region; a click on it says which band was picked."""

    sigClicked = Signal(object)

    def __init__(self, band: int, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.band = band

    def mouseClickEvent(self, ev) -> None:  # noqa: N802 - pyqtgraph's name
        if ev.button() == Qt.MouseButton.LeftButton and not self.moving:
            self.sigClicked.emit(self)
        super().mouseClickEvent(ev)


@dataclass
class BandItems:
    """The plot items of one band."""

    region: BandRegion
    label: pg.TextItem
    alert: LevelLine | None = None
    danger: LevelLine | None = None

    def line(self, level: str) -> LevelLine | None:
        return self.alert if level == "alert" else self.danger


class BandEditLayer(QObject):
    """Editable alarm bands on one plot.

    Parameters
    ----------
    plot : pg.PlotWidget
    palette : Palette

    Signals
    -------
    edges_edited(int, float, float)
        A band's region was dragged: band index, low and high edge in Hz.
    level_edited(int, str, float)
        A level line was dragged: band index, ``"alert"`` or ``"danger"``, value in the
        plot's unit.
    level_moving(int, str, float)
        A level line is being dragged (for a readout).
    band_clicked(int)
    """

    edges_edited = Signal(int, float, float)
    level_edited = Signal(int, str, float)
    level_moving = Signal(int, str, float)
    band_clicked = Signal(int)

    def __init__(self, plot: pg.PlotWidget, palette: Palette, parent: QObject | None = None):
        super().__init__(parent)
        self.plot = plot
        self.palette = palette
        self.bands: list[DrawnBand] = []
        self.items: dict[int, BandItems] = {}
        self.x_bounds: tuple[float, float] | None = None
        self._syncing = False

    # -- public -------------------------------------------------------------------------
    def set_bands(self, bands: list[DrawnBand]) -> None:
        """Draw ``bands``; items are moved in place when the same bands are drawn."""
        same = [b.index for b in bands] == [b.index for b in self.bands] and all(
            a.has_levels == b.has_levels for a, b in zip(bands, self.bands))
        if not same:
            self.clear()
            self.bands = list(bands)
            self._build()
            return
        self.bands = list(bands)
        self._syncing = True
        try:
            for b in bands:
                self._place(b, self.items[b.index])
        finally:
            self._syncing = False

    def clear(self) -> None:
        for it in self.items.values():
            for item in (it.region, it.label, it.alert, it.danger):
                if item is not None:
                    self.plot.removeItem(item)
        self.items = {}
        self.bands = []

    def line(self, index: int, level: str) -> LevelLine | None:
        """The alert or danger line of band ``index`` (None when not drawn)."""
        it = self.items.get(index)
        return it.line(level) if it is not None else None

    def region(self, index: int) -> BandRegion | None:
        it = self.items.get(index)
        return it.region if it is not None else None

    def drawn_names(self) -> list[str]:
        return [b.name for b in self.bands]

    # -- building -----------------------------------------------------------------------
    def _pens(self, level: str):
        colour = self.palette.state(level)
        style = Qt.PenStyle.DashLine if level == "alert" else Qt.PenStyle.SolidLine
        return pg.mkPen(colour, width=2, style=style), pg.mkPen(colour, width=4, style=style)

    def _brush(self, b: DrawnBand) -> QColor:
        c = QColor(self.palette.trace(0))
        wide = self.x_bounds is not None and \
            b.high_hz - b.low_hz > 0.5 * (self.x_bounds[1] - self.x_bounds[0])
        # A broadband band (the overall level) covers most of the plot: a light tint
        # keeps the narrow bands and the spectrum readable.
        c.setAlpha((40 if b.selected else 10) if wide else (80 if b.selected else 32))
        return c

    def _build(self) -> None:
        widths = sorted(self.bands, key=lambda b: b.high_hz - b.low_hz, reverse=True)
        rank = {b.index: k for k, b in enumerate(widths)}   # narrow bands on top
        font = QFont()
        font.setPointSizeF(8.0)
        edge = QColor(self.palette.trace(0)).darker(120)
        for b in self.bands:
            region = BandRegion(b.index, values=(b.low_hz, b.high_hz), movable=True,
                                bounds=self.x_bounds, brush=pg.mkBrush(self._brush(b)),
                                pen=pg.mkPen(edge, width=1),
                                hoverPen=pg.mkPen(edge, width=3), swapMode="block")
            # Above zero: pyqtgraph hands a drag to the item of highest total z, and the
            # view box itself (z −100) would take it from anything placed below it.
            region.setZValue(1 + rank[b.index])
            region.sigRegionChanged.connect(self._region_moving)
            region.sigRegionChangeFinished.connect(self._region_finished)
            region.sigClicked.connect(lambda r: self.band_clicked.emit(r.band))
            self.plot.addItem(region, ignoreBounds=True)
            label = pg.TextItem(b.name, color=self.palette.ui("foreground"), anchor=(0, 1))
            label.setFont(font)
            label.setZValue(40)
            self.plot.addItem(label, ignoreBounds=True)
            items = BandItems(region, label)
            if b.has_levels:
                for level in LEVELS:
                    pen, hover = self._pens(level)
                    line = LevelLine(getattr(b, level), (b.low_hz, b.high_hz), pen=pen,
                                     hover_pen=hover, band=b.index, level=level)
                    line.setZValue(20 + rank[b.index])
                    line.sigPositionChanged.connect(self._line_moving)
                    line.sigPositionChangeFinished.connect(self._line_finished)
                    self.plot.addItem(line, ignoreBounds=True)
                    setattr(items, level, line)
            self.items[b.index] = items
            self._syncing = True
            try:
                self._place(b, items)
            finally:
                self._syncing = False

    def _place(self, b: DrawnBand, it: BandItems) -> None:
        it.region.setRegion((b.low_hz, b.high_hz))
        it.region.setBrush(self._brush(b))
        it.region.setToolTip(b.tooltip or b.name)
        it.region.update()
        for level in LEVELS:
            line = it.line(level)
            if line is not None:
                line.setValue(getattr(b, level))
                line.set_x_range(b.low_hz, b.high_hz)
                line.setToolTip(f"{b.name}: {level} — drag up or down")
        self._place_label(b, it)

    @staticmethod
    def _place_label(b: DrawnBand, it: BandItems) -> None:
        lo, _ = it.region.getRegion()
        top = it.danger.value() if it.danger is not None else None
        if top is None:
            vb = it.region.getViewBox()
            top = vb.viewRange()[1][1] if vb is not None else 1.0
        it.label.setPos(lo, top)

    # -- signals ------------------------------------------------------------------------
    def _region_moving(self, region: BandRegion) -> None:
        it = self.items.get(region.band)
        if it is None:
            return
        lo, hi = region.getRegion()
        for level in LEVELS:
            line = it.line(level)
            if line is not None:
                line.set_x_range(lo, hi)
        b = next((x for x in self.bands if x.index == region.band), None)
        if b is not None:
            self._place_label(b, it)

    def _region_finished(self, region: BandRegion) -> None:
        if self._syncing:
            return
        lo, hi = region.getRegion()
        self.edges_edited.emit(region.band, float(lo), float(hi))

    def _line_moving(self, line: LevelLine) -> None:
        if self._syncing:
            return
        self.level_moving.emit(line.band, line.level, float(line.value()))

    def _line_finished(self, line: LevelLine) -> None:
        if self._syncing:
            return
        self.level_edited.emit(line.band, line.level, float(line.value()))
