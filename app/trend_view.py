"""The trend view: how a point's values and spectra changed over the weeks.

Three tabs over one point:

* **Trend** (:class:`~app.trend_panel.TrendPanel`) — chosen values against date with
  their alert and danger lines and forecast; clicking a run's point selects that run;
* **Waterfall** (:class:`~app.waterfall_panel.WaterfallPanel`) — the spectra stacked by
  date, as a cascade or a colour map, in Hz or in orders;
* **Compare** (:class:`~app.compare_panel.ComparePanel`) — a run's spectrum against the
  baseline or another run, the dB difference and the largest rises.

Every archive read runs in a job; a tab that is not on screen loads when it is shown.
"""

from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtWidgets import QTabWidget, QVBoxLayout, QWidget

from .compare_panel import ComparePanel
from .context import AppContext
from .point_panel import PointPanel
from .trend_panel import TrendPanel
from .waterfall_panel import WaterfallPanel


class TrendView(QWidget):
    """Trends, waterfall and reference comparison of one point.

    Parameters
    ----------
    ctx : AppContext
    parent : QWidget, optional

    Attributes
    ----------
    trend, waterfall, compare : PointPanel
        The three tabs.

    Signals
    -------
    message(str)
        A line for the status bar.
    """

    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.run_id: str | None = None
        self.tabs = QTabWidget(self)
        self.tabs.setDocumentMode(True)
        self.trend = TrendPanel(ctx, self.tabs)
        self.waterfall = WaterfallPanel(ctx, self.tabs)
        self.compare = ComparePanel(ctx, self.tabs)
        self.tabs.addTab(self.trend, "Trend")
        self.tabs.setTabToolTip(0, "Values against date, alarm levels and forecast")
        self.tabs.addTab(self.waterfall, "Waterfall")
        self.tabs.setTabToolTip(1, "Spectra stacked by date")
        self.tabs.addTab(self.compare, "Compare")
        self.tabs.setTabToolTip(2, "A run's spectrum against the baseline or another run")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.tabs)
        for panel in self.panels():
            panel.message.connect(self.message)
        ctx.archive_changed.connect(self._archive_changed)
        ctx.prefs_changed.connect(self._prefs_changed)
        ctx.run_selected.connect(self._run_selected)

    def panels(self) -> list[PointPanel]:
        return [self.trend, self.waterfall, self.compare]

    def show_point(self, point_path: str | None, run_id: str | None) -> None:
        """Show ``point_path``; ``run_id`` is ringed on the trend and compared.

        Another run of the point shown reads nothing again but the comparison (the
        trends and the waterfall do not depend on the run).
        """
        same = point_path is not None and all(p.holds(point_path) for p in self.panels())
        self.point, self.run_id = point_path, run_id
        if same:
            if run_id:
                self.trend.select_run(run_id)
                self.compare.set_run(run_id)
            return
        for panel in self.panels():
            panel.set_point(point_path, run_id)

    def _run_selected(self, run_id: str) -> None:
        self.run_id = run_id
        if self.point:
            self.compare.set_run(run_id)

    def _archive_changed(self) -> None:
        if self.point:
            for panel in self.panels():
                panel.request()

    def _prefs_changed(self) -> None:
        for panel in self.panels():
            panel.redraw()
