"""One value of one point against date on a pyqtgraph plot: the runs as points coloured
and shaped by their alarm state, the alert and danger lines, and the forecast as a
dashed curve inside its interval band with the expected crossing dates marked.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor, QFont

from engine.trends import TrendData

from .context import Palette
from .plots import make_plot, style_plot
from .trend_data import date_text, forecast_line, time_text, value_label

#: Symbol of each alarm state (shape as well as colour, so that the state never rests
#: on colour alone).
STATE_SYMBOLS = {"ok": "o", "alert": "t1", "danger": "s", "bad data": "x", "no data": "d",
                 "": "d"}
#: Share of the value range left above the highest value or level drawn.
HEADROOM = 0.12


def state_symbol(state: str) -> str:
    return STATE_SYMBOLS.get(state, STATE_SYMBOLS[""])


class TrendPlot:
    """A plot of one :class:`~engine.trends.TrendData`.

    Parameters
    ----------
    palette : Palette
    on_click : callable(str)
        Called with the run id of a clicked point.
    parent : QWidget, optional

    Attributes
    ----------
    widget : pg.PlotWidget
    scatter : pg.ScatterPlotItem
        One spot per run with a value; each spot's data is its run id.
    alert_line, danger_line : pg.InfiniteLine or None
        At the plan's levels (display unit).
    forecast_curve : pg.PlotCurveItem
        The fitted and extrapolated curve (empty when there is no forecast).
    """

    def __init__(self, palette: Palette, on_click: Callable[[str], None], parent=None):
        self.palette = palette
        self._on_click = on_click
        self.widget = make_plot(palette, title="", x_label="Date (UTC)", y_label="",
                                tooltip="", parent=parent)
        self.widget.setAxisItems({"bottom": pg.DateAxisItem(orientation="bottom", utcOffset=0)})
        self.widget.getPlotItem().getAxis("bottom").enableAutoSIPrefix(False)
        self.widget.setMinimumHeight(170)
        style_plot(self.widget, palette)
        self.td: TrendData | None = None
        self.factor = 1.0
        self.unit = ""
        self._by_run: dict[str, int] = {}
        self.line = pg.PlotDataItem([], [], connect="finite")
        self.scatter = pg.ScatterPlotItem(size=10, hoverable=True, tip=self._tip)
        self.scatter.setZValue(10)
        self.scatter.sigClicked.connect(self._clicked)
        self.ring = pg.ScatterPlotItem(size=18, symbol="o", brush=None)
        self.ring.setZValue(9)
        self.forecast_curve = pg.PlotCurveItem([], [])
        self.low_curve = pg.PlotCurveItem([], [])
        self.high_curve = pg.PlotCurveItem([], [])
        self.band = pg.FillBetweenItem(self.low_curve, self.high_curve)
        self.band.setZValue(-5)
        self.crossings = pg.ErrorBarItem(x=np.zeros(0), y=np.zeros(0))
        self.crossing_marks = pg.ScatterPlotItem(size=11, symbol="d", hoverable=True,
                                                 tip=lambda x, y, data: str(data))
        self.crossing_marks.setZValue(8)
        self.alert_line: pg.InfiniteLine | None = None
        self.danger_line: pg.InfiniteLine | None = None
        self.note = pg.TextItem("", anchor=(1, 0))
        font = QFont()
        font.setPointSizeF(8.0)
        self.note.setFont(font)
        item = self.widget.getPlotItem()
        for it in (self.band, self.low_curve, self.high_curve, self.forecast_curve, self.line,
                   self.crossings, self.crossing_marks, self.ring, self.scatter):
            item.addItem(it)
        item.addItem(self.note, ignoreBounds=True)
        item.getViewBox().sigRangeChanged.connect(self._place_note)

    # -- drawing ----------------------------------------------------------------------
    def draw(self, td: TrendData, *, factor: float, unit: str,
             selected: str | None = None) -> None:
        """Show ``td``, values × ``factor`` in ``unit``, ringing the run ``selected``."""
        pal = self.palette
        self.td, self.factor, self.unit = td, factor, unit
        item = self.widget.getPlotItem()
        item.setTitle(f"{value_label(td.value)} — {td.point}", size="10pt")
        item.setLabel("left", unit if unit not in ("", "1") else value_label(td.value))
        # One value per plot: one trace colour for all (the palette's first, which is
        # none of the state colours the points and levels use).
        trace = pal.trace(0)
        ok = np.isfinite(td.values)
        t, v = td.times_s[ok], td.values[ok] * factor
        self.line.setData(td.times_s, td.values * factor)
        self.line.setPen(pg.mkPen(trace, width=1.5))
        ids = [r for r, good in zip(td.run_ids, ok) if good]
        states = [s for s, good in zip(td.states, ok) if good]
        self._by_run = {r: i for i, r in enumerate(ids)}
        fg = pal.ui("foreground")
        self.scatter.setData(
            [{"pos": (float(x), float(y)), "data": rid, "symbol": state_symbol(st),
              "brush": pg.mkBrush(pal.state(st)), "pen": pg.mkPen(fg, width=0.8)}
             for x, y, rid, st in zip(t, v, ids, states)])
        self.ring.setPen(pg.mkPen(pal.ui("cursor"), width=2))
        self._draw_levels(td, factor, unit)
        self._draw_forecast(td, factor, trace)
        self.select(selected)
        self.note.setColor(fg)
        self.note.setText(forecast_line(td))
        self._fit_view(t, v)
        self._place_note()

    def _draw_levels(self, td: TrendData, factor: float, unit: str) -> None:
        item = self.widget.getPlotItem()
        for line in (self.alert_line, self.danger_line):
            if line is not None:
                item.removeItem(line)
        self.alert_line = self.danger_line = None
        for level, kind, style in ((td.alert, "alert", Qt.PenStyle.DashLine),
                                   (td.danger, "danger", Qt.PenStyle.SolidLine)):
            if level is None or not math.isfinite(level):
                continue
            colour = self.palette.state(kind)
            y = float(level) * factor
            line = pg.InfiniteLine(pos=y, angle=0, movable=False,
                                   pen=pg.mkPen(colour, width=2, style=style),
                                   label=f"{kind} {y:.3g} {unit}".rstrip(),
                                   labelOpts={"position": 0.02, "color": colour,
                                              "anchors": [(0, 1), (0, 1)]})
            line.setToolTip(f"{kind.capitalize()} level of the alarm plan"
                            + (f" (band {td.levels_from})" if td.levels_from else "")
                            + f": {y:.4g} {unit}")
            line.setZValue(4)
            item.addItem(line, ignoreBounds=True)
            setattr(self, f"{kind}_line", line)

    def _draw_forecast(self, td: TrendData, factor: float, trace: QColor) -> None:
        f = td.forecast
        empty = np.zeros(0)
        if f is None or f.curve_t_s.size == 0:
            for c in (self.forecast_curve, self.low_curve, self.high_curve):
                c.setData(empty, empty)
            self.crossings.setData(x=empty, y=empty, left=empty, right=empty)
            self.crossing_marks.setData([])
            return
        self.forecast_curve.setData(f.curve_t_s, f.curve_value * factor)
        self.forecast_curve.setPen(pg.mkPen(trace, width=2, style=Qt.PenStyle.DashLine))
        fill = QColor(trace)
        fill.setAlpha(45)
        edge = QColor(trace)
        edge.setAlpha(90)
        low = np.where(np.isfinite(f.curve_low), f.curve_low, f.curve_value) * factor
        high = np.where(np.isfinite(f.curve_high), f.curve_high, f.curve_value) * factor
        self.low_curve.setData(f.curve_t_s, low)
        self.high_curve.setData(f.curve_t_s, high)
        for c in (self.low_curve, self.high_curve):
            c.setPen(pg.mkPen(edge, width=1))
        self.band.setBrush(pg.mkBrush(fill))
        self.widget.setToolTip("Dashed: the forecast; shaded: its 90 % interval.\n"
                               + f.reason)
        xs, ys, lefts, rights, marks = [], [], [], [], []
        for kind, level in (("alert", td.alert), ("danger", td.danger)):
            date = getattr(f, f"{kind}_date_s")
            if level is None or not math.isfinite(date):
                continue
            lo, hi = getattr(f, f"{kind}_low_s"), getattr(f, f"{kind}_high_s")
            xs.append(date)
            ys.append(level * factor)
            lefts.append(date - lo if math.isfinite(lo) else 0.0)
            rights.append(hi - date if math.isfinite(hi) else 0.0)
            marks.append({"pos": (date, level * factor),
                          "brush": pg.mkBrush(self.palette.state(kind)),
                          "pen": pg.mkPen(self.palette.ui("foreground"), width=0.8),
                          "data": f"{kind} expected {date_text(date)}"})
        arr = np.asarray
        self.crossings.setData(x=arr(xs, float), y=arr(ys, float), left=arr(lefts, float),
                               right=arr(rights, float), beam=0.0,
                               pen=pg.mkPen(self.palette.ui("foreground"), width=1.5))
        self.crossing_marks.setData(marks)

    def _fit_view(self, t: np.ndarray, v: np.ndarray) -> None:
        """x: the runs and the forecast curve; y: from zero (or the lowest value) to
        above the highest value and level, so that both lines are always in view."""
        td = self.td
        xs = [t] if t.size else []
        ys = [v] if v.size else []
        f = td.forecast if td is not None else None
        if f is not None and f.curve_t_s.size:
            xs.append(f.curve_t_s)
            tops = [float(np.nanmax(v))] if v.size else []
            tops += [lv * self.factor for lv in (td.alert, td.danger) if lv is not None]
            top = max(tops, default=0.0)
            shown = f.curve_value * self.factor
            ys.append(shown[shown <= 1.5 * top] if top > 0 else shown)
        for level in (td.alert, td.danger) if td is not None else ():
            if level is not None and math.isfinite(level):
                ys.append(np.array([level * self.factor]))
        if not xs:
            return
        x = np.concatenate(xs)
        y = np.concatenate(ys) if ys else np.zeros(1)
        y = y[np.isfinite(y)]
        x0, x1 = float(np.min(x)), float(np.max(x))
        pad = max(0.03 * (x1 - x0), 86400.0)
        lo = min(0.0, float(y.min())) if y.size else 0.0
        hi = float(y.max()) if y.size else 1.0
        if hi <= lo:
            hi = lo + 1.0
        vb = self.widget.getPlotItem().getViewBox()
        vb.setRange(xRange=(x0 - pad, x1 + pad), yRange=(lo, hi + HEADROOM * (hi - lo)),
                    padding=0)

    def _place_note(self, *_args) -> None:
        (_, x1), (_, y1) = self.widget.getPlotItem().viewRange()
        self.note.setPos(x1, y1)

    # -- interaction ------------------------------------------------------------------
    def select(self, run_id: str | None) -> None:
        """Ring the point of ``run_id`` (nothing when it is not on this plot)."""
        i = self._by_run.get(run_id) if run_id else None
        if i is None:
            self.ring.setData([])
            return
        spot = self.scatter.points()[i]
        self.ring.setData([{"pos": (spot.pos().x(), spot.pos().y())}])

    def _clicked(self, _item, points, _event=None) -> None:
        if len(points):
            self._on_click(str(points[0].data()))

    def _tip(self, x: float, y: float, data) -> str:
        td = self.td
        if td is None:
            return ""
        try:
            i = td.run_ids.index(str(data))
        except ValueError:
            return ""
        word = self.palette.state_word(td.states[i])
        zone = f" · ISO zone {td.zones[i]}" if td.zones[i] else ""
        return (f"{time_text(float(x))}\n{value_label(td.value)}: {y:.4g} {self.unit}\n"
                f"state: {word}{zone}\nrun {data} — click to open it")

    def restyle(self, palette: Palette) -> None:
        self.palette = palette
        style_plot(self.widget, palette)
