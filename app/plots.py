"""Shared pyqtgraph pieces: themed plot widgets, source markers, alarm-band shading and
highlighted frequencies.

Every layer keeps its positions in Hz and is redrawn through an :class:`XAxis`, which
turns Hz into what the x axis shows (Hz, CPM or orders of the point's shaft), so that a
change of axis never recomputes anything.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QFontMetrics

from .context import Palette

#: What the x axis of a spectrum can show.
X_AXES = ("Hz", "CPM", "orders")


@dataclass(frozen=True)
class XAxis:
    """Hz ↔ x-axis value for a spectrum plot.

    Attributes
    ----------
    kind : str
        ``"Hz"``, ``"CPM"`` (cycles per minute, 60 × Hz) or ``"orders"`` (multiples of
        the shaft's speed).
    shaft_hz : float or None
        Speed of the point's shaft, rev/s (needed for orders).
    """

    kind: str = "Hz"
    shaft_hz: float | None = None

    @property
    def usable(self) -> str:
        """The kind actually drawn: orders fall back to Hz without a speed."""
        if self.kind == "orders" and not self.shaft_hz:
            return "Hz"
        return self.kind if self.kind in X_AXES else "Hz"

    def factor(self) -> float:
        """x value per Hz."""
        k = self.usable
        if k == "CPM":
            return 60.0
        if k == "orders":
            return 1.0 / float(self.shaft_hz)
        return 1.0

    def to_x(self, hz):
        return np.asarray(hz, dtype=float) * self.factor() if np.ndim(hz) else \
            float(hz) * self.factor()

    def to_hz(self, x: float) -> float:
        return float(x) / self.factor()

    def label(self) -> str:
        return {"Hz": "Frequency (Hz)", "CPM": "Frequency (CPM)",
                "orders": "Order of shaft speed (×)"}[self.usable]

    def text(self, hz: float) -> str:
        """A frequency in every form the readouts use: Hz, CPM and order when known."""
        parts = [f"{hz:.2f} Hz", f"{60.0 * hz:.0f} CPM"]
        if self.shaft_hz:
            parts.append(f"{hz / self.shaft_hz:.2f}×")
        return " · ".join(parts)


def style_plot(plot: pg.PlotWidget, palette: Palette) -> None:
    """Background, axis colours and grid of ``plot`` from the current theme."""
    plot.setBackground(palette.ui("background"))
    fg = palette.ui("foreground")
    item = plot.getPlotItem()
    for name in ("left", "bottom"):
        axis = item.getAxis(name)
        axis.setPen(pg.mkPen(fg))
        axis.setTextPen(pg.mkPen(fg))
        # Grid and labels at the major ticks only: the minor grid lines cost more to
        # paint than the curves themselves and add little.
        axis.setStyle(maxTickLevel=0)
    item.titleLabel.setAttr("color", fg.name())
    item.showGrid(x=True, y=True, alpha=0.25)


def make_plot(palette: Palette, *, title: str, x_label: str, y_label: str,
              tooltip: str = "", parent=None) -> pg.PlotWidget:
    """A plot with our theme, labels, no SI prefixes, and a title."""
    plot = pg.PlotWidget(parent=parent)
    item = plot.getPlotItem()
    item.setTitle(title, size="10pt")
    item.setLabel("bottom", x_label)
    item.setLabel("left", y_label)
    for name in ("left", "bottom"):
        item.getAxis(name).enableAutoSIPrefix(False)
    item.setMenuEnabled(True)
    plot.setToolTip(tooltip)
    style_plot(plot, palette)
    return plot


def set_title(plot: pg.PlotWidget, title: str) -> None:
    plot.getPlotItem().setTitle(title, size="10pt")


@dataclass(frozen=True)
class Marker:
    """A frequency to mark: position in Hz, label, kind (a key of the palette's
    ``markers``), whether it is a sideband (drawn dotted) and a tooltip."""

    frequency_hz: float
    label: str
    kind: str
    sideband: bool = False
    tooltip: str = ""


def marker_colour(palette: Palette, kind: str) -> QColor:
    """A marker kind's colour, lightened on the dark theme so that it stands out."""
    colour = palette.marker(kind)
    return colour.lighter(150) if palette.theme == "dark" else colour


def _harmonic_number(label: str) -> int:
    """3 for "3×BPFO" or "3×", 1 for "BPFO" (labels without a leading multiple)."""
    head = label.split("×", 1)[0]
    return int(head) if head.isdigit() else 1


class _MarkerLabels(pg.GraphicsObject):
    """The labels of a plot's markers, painted in one item at the top of the view,
    upright text along each line; a label that would overlap one already drawn is left
    out (fundamentals are drawn first, then 2×, 3× …)."""

    def __init__(self):
        super().__init__()
        self.items: list[tuple[float, str, QColor]] = []
        self.font = QFont()
        self.font.setPointSizeF(7.5)
        self.drawn: list[str] = []
        self.setZValue(7)

    def set_items(self, items: list[tuple[float, str, QColor]]) -> None:
        self.prepareGeometryChange()
        self.items = sorted(items, key=lambda it: (_harmonic_number(it[1]), it[0]))
        self.update()

    def boundingRect(self) -> QRectF:
        vb = self.getViewBox()
        return QRectF(vb.viewRect()) if vb is not None else QRectF()

    def viewRangeChanged(self) -> None:
        self.prepareGeometryChange()
        self.update()

    def paint(self, p, *_args) -> None:
        vb = self.getViewBox()
        self.drawn = []
        if vb is None or not self.items:
            return
        rect = vb.viewRect()
        to_device = p.transform()
        metrics = QFontMetrics(self.font)
        p.save()
        p.resetTransform()
        p.setFont(self.font)
        taken: list[float] = []
        gap = metrics.height() + 1
        for x, text, colour in self.items:
            if not rect.left() <= x <= rect.right():
                continue
            top = to_device.map(QPointF(x, rect.bottom()))  # the view's top edge
            if any(abs(top.x() - t) < gap for t in taken):
                continue
            taken.append(top.x())
            self.drawn.append(text)
            p.save()
            p.setPen(colour)
            # Upright text reading upwards, its end just under the top, right of the line.
            p.translate(top.x() + metrics.ascent() + 1, top.y() + 4
                        + metrics.horizontalAdvance(text))
            p.rotate(-90)
            p.drawText(0, 0, text)
            p.restore()
        p.restore()


class MarkerLayer:
    """Vertical source markers on one plot, shown or hidden by kind.

    Lines of one kind and style are one curve of vertical segments (a plot has tens of
    markers; one item per marker makes every redraw slow), stretched over the view's
    height whenever the view moves; labels are painted by one item.

    Parameters
    ----------
    plot : pg.PlotWidget
    palette : Palette
    """

    def __init__(self, plot: pg.PlotWidget, palette: Palette):
        self.plot = plot
        self.palette = palette
        self.markers: list[Marker] = []
        self.kinds_on: set[str] = set()
        self.visible = True
        self._drawn: list[Marker] = []
        self._curves: dict[tuple[str, bool], tuple[pg.PlotCurveItem, np.ndarray]] = {}
        self._labels = _MarkerLabels()
        plot.addItem(self._labels, ignoreBounds=True)
        self._axis = XAxis()
        plot.getPlotItem().getViewBox().sigYRangeChanged.connect(self._stretch)

    def set_markers(self, markers: list[Marker]) -> None:
        self.markers = list(markers)
        self.redraw()

    def set_kinds(self, kinds: set[str]) -> None:
        self.kinds_on = set(kinds)
        self.redraw()

    def set_visible(self, on: bool) -> None:
        self.visible = bool(on)
        self.redraw()

    def set_axis(self, axis: XAxis) -> None:
        self._axis = axis
        self.redraw()

    def shown(self) -> list[Marker]:
        """The markers drawn now (kind switched on, layer visible)."""
        if not self.visible:
            return []
        return [m for m in self.markers if m.kind in self.kinds_on]

    def clear(self) -> None:
        for curve, _ in self._curves.values():
            curve.setData([], [])
            curve.setVisible(False)
        self._drawn = []
        self._labels.set_items([])

    def redraw(self) -> None:
        self.clear()
        self._drawn = self.shown()
        groups: dict[tuple[str, bool], list[float]] = {}
        for m in self._drawn:
            groups.setdefault((m.kind, m.sideband), []).append(self._axis.to_x(m.frequency_hz))
        for (kind, sideband), xs in groups.items():
            pen = pg.mkPen(marker_colour(self.palette, kind), width=1,
                           style=Qt.PenStyle.DotLine if sideband else Qt.PenStyle.DashLine)
            curve, _ = self._curves.get((kind, sideband), (None, None))
            if curve is None:                 # one curve per kind and style, kept
                curve = pg.PlotCurveItem(connect="pairs")
                curve.setZValue(5)
                self.plot.addItem(curve, ignoreBounds=True)
            curve.setPen(pen)
            curve.setVisible(True)
            self._curves[(kind, sideband)] = (curve, np.repeat(np.asarray(xs, dtype=float), 2))
        for key in set(self._curves) - set(groups):
            self._curves[key] = (self._curves[key][0], np.zeros(0))
        self._stretch()
        self._labels.set_items([(self._axis.to_x(m.frequency_hz), m.label,
                                 marker_colour(self.palette, m.kind))
                                for m in self._drawn if not m.sideband])

    def _stretch(self, *_args) -> None:
        """Make every marker line span the view's height."""
        (_, _), (y0, y1) = self.plot.getPlotItem().viewRange()
        span = np.array([y0, y1], dtype=float)
        for curve, xs in self._curves.values():
            if xs.size:
                curve.setData(xs, np.tile(span, xs.size // 2))

    def labels(self) -> list[str]:
        """Labels of the markers drawn now (sidebands have none)."""
        return [m.label for m in self._drawn if not m.sideband]

    def nearest(self, hz: float, tolerance_hz: float) -> Marker | None:
        """The drawn marker nearest ``hz`` within ``tolerance_hz``, or None."""
        best = min(self._drawn, key=lambda m: abs(m.frequency_hz - hz), default=None)
        if best is None or abs(best.frequency_hz - hz) > tolerance_hz:
            return None
        return best


@dataclass(frozen=True)
class Band:
    """An alarm band to shade: edges in Hz, its name, the alert and danger levels in the
    plot's amplitude unit (None when they cannot be shown in it) and the run's state in
    the band (``ok``, ``alert``, ``danger`` …; "" when not evaluated), shown by colour
    and by word."""

    name: str
    low_hz: float
    high_hz: float
    alert: float | None
    danger: float | None
    tooltip: str = ""
    state: str = ""


class BandLayer:
    """Alarm bands shaded on a spectrum, with their alert and danger levels drawn."""

    def __init__(self, plot: pg.PlotWidget, palette: Palette):
        self.plot = plot
        self.palette = palette
        self.bands: list[Band] = []
        self.visible = True
        self._items: list = []
        self._axis = XAxis()
        self._log_y = False
        self._texts: list[tuple[pg.TextItem, float]] = []
        plot.getPlotItem().getViewBox().sigRangeChanged.connect(self._follow_view)

    def set_bands(self, bands: list[Band]) -> None:
        self.bands = list(bands)
        self.redraw()

    def set_axis(self, axis: XAxis, *, log_y: bool = False) -> None:
        self._axis = axis
        self._log_y = log_y
        self.redraw()

    def set_visible(self, on: bool) -> None:
        self.visible = bool(on)
        self.redraw()

    def clear(self) -> None:
        for it in self._items:
            self.plot.removeItem(it)
        self._items = []
        self._texts = []

    def _level_y(self, value: float) -> float:
        return float(np.log10(value)) if self._log_y else float(value)

    def redraw(self) -> None:
        self.clear()
        if not self.visible:
            return
        alert_c, danger_c = self.palette.state("alert"), self.palette.state("danger")
        font = QFont()
        font.setPointSizeF(7.5)
        for i, b in enumerate(self.bands):
            lo, hi = self._axis.to_x(b.low_hz), self._axis.to_x(b.high_hz)
            fill = QColor(self.palette.state(b.state))
            fill.setAlpha(60)
            edge = QColor(fill)
            edge.setAlpha(160)
            region = pg.LinearRegionItem(values=(lo, hi), movable=False, brush=pg.mkBrush(fill),
                                         pen=pg.mkPen(edge))
            region.setZValue(-10)
            region.setToolTip(b.tooltip or b.name)
            self.plot.addItem(region, ignoreBounds=True)
            self._items.append(region)
            for level, colour, style in ((b.alert, alert_c, Qt.PenStyle.DashLine),
                                         (b.danger, danger_c, Qt.PenStyle.SolidLine)):
                if level is None or not level > 0:
                    continue
                y = self._level_y(level)
                seg = pg.PlotCurveItem([lo, hi], [y, y], pen=pg.mkPen(colour, width=2,
                                                                      style=style))
                seg.setZValue(6)
                self.plot.addItem(seg, ignoreBounds=True)
                self._items.append(seg)
            word = self.palette.state_word(b.state)
            # Neighbouring narrow bands: their names are stacked, not overlaid.
            text = pg.TextItem(f"{b.name}: {word}", color=self.palette.ui("foreground"),
                               anchor=(0, 1.0 + 1.1 * (i % 3)))
            text.setFont(font)
            text.setToolTip(b.tooltip or b.name)
            self._place(text, lo)
            self.plot.addItem(text, ignoreBounds=True)
            self._items.append(text)
            self._texts.append((text, lo))

    def _place(self, text: pg.TextItem, x: float) -> None:
        """Band names sit at the bottom of the view, whatever the zoom."""
        (_, _), (y0, _) = self.plot.getPlotItem().viewRange()
        text.setPos(x, y0)

    def _follow_view(self, *_args) -> None:
        for text, x in self._texts:
            self._place(text, x)

    def names(self) -> list[str]:
        return [b.name for b in self.bands] if self.visible else []


class HighlightLayer:
    """Frequencies picked out on a plot (the evidence of a finding)."""

    def __init__(self, plot: pg.PlotWidget, palette: Palette):
        self.plot = plot
        self.palette = palette
        self.items: list[tuple[float, str]] = []
        self._lines: list[pg.InfiniteLine] = []
        self._axis = XAxis()

    def set_items(self, items: list[tuple[float, str]]) -> None:
        """``(frequency_hz, label)`` pairs to highlight."""
        self.items = list(items)
        self.redraw()

    def set_axis(self, axis: XAxis) -> None:
        self._axis = axis
        self.redraw()

    def redraw(self) -> None:
        for line in self._lines:
            self.plot.removeItem(line)
        self._lines = []
        # A broad, half-transparent band behind the trace: distinct from the cursor's
        # thin lines and from the dashed source markers.
        glow = QColor(self.palette.ui("foreground"))
        glow.setAlpha(70)
        for hz, label in self.items:
            line = pg.InfiniteLine(pos=self._axis.to_x(hz), angle=90,
                                   pen=pg.mkPen(glow, width=7), movable=False)
            line.setToolTip(f"{label}: {self._axis.text(hz)}")
            line.setZValue(-5)
            self.plot.addItem(line, ignoreBounds=True)
            self._lines.append(line)


def nearest_line(frequency_hz: np.ndarray, amplitude: np.ndarray, hz: float) -> tuple[float, float]:
    """The line of a spectrum nearest ``hz``: (its frequency in Hz, its amplitude)."""
    if frequency_hz.size == 0:
        return float(hz), float("nan")
    i = int(np.clip(np.searchsorted(frequency_hz, hz), 1, frequency_hz.size - 1))
    if abs(frequency_hz[i - 1] - hz) <= abs(frequency_hz[i] - hz):
        i -= 1
    return float(frequency_hz[i]), float(amplitude[i])

