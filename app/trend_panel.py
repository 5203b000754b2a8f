"""The trend tab: the values chosen for a point against date, one stacked plot per value
sharing the date axis, each with its alert and danger lines and forecast, and a readout
of the forecast dates, fit model and reason.  Clicking a run's point selects that run
(``AppContext.select_run``); a trend can be written to CSV.
"""

from __future__ import annotations

import re
from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction
from PySide6.QtWidgets import (
    QCheckBox,
    QFileDialog,
    QHBoxLayout,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QMenu,
    QScrollArea,
    QSplitter,
    QToolButton,
    QVBoxLayout,
    QWidget,
)

from engine.trends import TrendData

from . import dialogs
from .context import AppContext
from .point_panel import PointPanel
from .trend_data import (DEFAULT_VALUE, TrendSet, date_text, display_unit, forecast_line,
                         load_trends, state_counts, value_label)
from .trend_plots import STATE_SYMBOLS, TrendPlot

#: Preference keys.
PREF_VALUES = "trend/values"
PREF_FORECAST = "trend/forecast"
#: Glyph shown beside each state word in the legend (the plot symbols' shapes).
LEGEND_GLYPHS = {"o": "●", "t1": "▲", "s": "■", "x": "✕", "d": "◆"}


def csv_name(point: str, value: str) -> str:
    """A file name for a trend CSV: ``P-102_pump-DE-H_overall_velocity_mm_s.csv``."""
    parts = point.split("/")[1:] + [value.replace("band:", "band-")]
    return "_".join(re.sub(r"[^\w.-]+", "-", p).strip("-") for p in parts) + ".csv"


class TrendPanel(PointPanel):
    """Trends of the chosen values of one point.

    Attributes
    ----------
    values_list : QListWidget
        The value picker (checkable; each item's data is the value name).
    plots : list of TrendPlot
        One per value shown, top to bottom in the order of the picker.

    Signals
    -------
    exported(str)
        A trend CSV was written to this path.
    """

    exported = Signal(str)
    job_title = "Read trends"
    failure_text = "The trends could not be read"

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(ctx, parent)
        saved = ctx.prefs.get(PREF_VALUES, DEFAULT_VALUE, str) or DEFAULT_VALUE
        self.values: list[str] = [v for v in saved.split(",") if v]
        self.plots: list[TrendPlot] = []
        self._csv_job = None

        self.values_list = QListWidget(self)
        self.values_list.setToolTip("Tick the values to trend; each gets its own plot")
        self.values_list.itemChanged.connect(self._value_ticked)
        self.forecast_box = QCheckBox("Forecast alert and danger", self)
        self.forecast_box.setToolTip("Fit the recent runs and extrapolate to the alert and "
                                     "danger levels (dashed, with its 90 % interval)")
        self.forecast_box.setChecked(ctx.prefs.get(PREF_FORECAST, True, bool))
        self.forecast_box.toggled.connect(self._forecast_toggled)
        self.export_button = QToolButton(self)
        self.export_button.setText("Export CSV…")
        self.export_button.setToolTip("Write a trend (date, value, state, zone, run) to a "
                                      "CSV file")
        self.export_button.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        self.export_menu = QMenu(self.export_button)
        self.export_button.setMenu(self.export_menu)
        self.export_button.setEnabled(False)
        self.legend = QLabel("", self)
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.legend.setWordWrap(True)

        side = QWidget(self)
        side_lay = QVBoxLayout(side)
        side_lay.setContentsMargins(0, 0, 0, 0)
        side_lay.addWidget(QLabel("<b>Values</b>", side))
        side_lay.addWidget(self.values_list, 1)
        side_lay.addWidget(self.forecast_box)
        side_lay.addWidget(self.export_button)
        side_lay.addWidget(self.legend)
        side.setMaximumWidth(300)
        side.setMinimumWidth(220)

        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.header.setWordWrap(True)
        self.plot_split = QSplitter(Qt.Orientation.Vertical, self)
        self.plot_split.setChildrenCollapsible(False)
        self.readout = QLabel("", self)
        self.readout.setTextFormat(Qt.TextFormat.RichText)
        self.readout.setWordWrap(True)
        self.readout.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        scroll = QScrollArea(self)
        scroll.setWidgetResizable(True)
        scroll.setWidget(self.readout)
        scroll.setMinimumHeight(80)
        scroll.setMaximumHeight(190)
        body = QWidget(self)
        body_lay = QVBoxLayout(body)
        body_lay.setContentsMargins(0, 0, 0, 0)
        body_lay.addWidget(self.header)
        body_lay.addWidget(self.plot_split, 1)
        body_lay.addWidget(scroll)

        lay = QHBoxLayout(self)
        lay.addWidget(side)
        lay.addWidget(body, 1)
        ctx.run_selected.connect(self.select_run)

    # -- the job ----------------------------------------------------------------------
    def job_fn(self):
        arc, point = self.ctx.archive(), self.point
        values, forecast = list(self.values), self.forecast_box.isChecked()

        def work(progress, cancel) -> TrendSet:
            return load_trends(arc, point, values, forecast=forecast, progress=progress,
                               cancel=cancel)
        self.header.setText(f"<b>{point}</b> — reading the trends…")
        return work

    # -- drawing ----------------------------------------------------------------------
    def clear(self, text: str) -> None:
        self.header.setText(text)
        self._set_plot_count(0)
        self.readout.setText("")
        self.legend.setText("")
        self.export_menu.clear()
        self.export_button.setEnabled(False)

    def draw(self, ts: TrendSet) -> None:
        shown = [td.value for td in ts.trends]
        self._fill_picker(ts, shown)
        self._set_plot_count(len(ts.trends))
        system = self.ctx.prefs.units
        for plot, td in zip(self.plots, ts.trends):
            factor, unit = display_unit(td.unit, system)
            plot.restyle(self.ctx.palette)
            plot.draw(td, factor=factor, unit=unit, selected=self.run_id)
        n = len(ts.trends[0].times_s) if ts.trends else 0
        span = (f"{n} runs, {date_text(ts.trends[0].times_s[0])} to "
                f"{date_text(ts.trends[0].times_s[-1])}") if n else "no runs"
        self.header.setText(f"<b>{ts.point}</b> — {span}. Click a point to open its run.")
        self.readout.setText(self._readout(ts))
        self.legend.setText(self._legend(ts.trends))
        self.export_menu.clear()
        for td in ts.trends:
            act = QAction(f"{value_label(td.value)}…", self.export_menu)
            act.triggered.connect(lambda _=False, v=td.value: self.choose_csv(v))
            self.export_menu.addAction(act)
        self.export_button.setEnabled(bool(ts.trends))

    def _set_plot_count(self, n: int) -> None:
        while len(self.plots) > n:
            plot = self.plots.pop()
            plot.widget.setParent(None)
            plot.widget.deleteLater()
        while len(self.plots) < n:
            plot = TrendPlot(self.ctx.palette, self._clicked, self.plot_split)
            if self.plots:
                plot.widget.setXLink(self.plots[0].widget)
            self.plot_split.addWidget(plot.widget)
            self.plots.append(plot)

    def _fill_picker(self, ts: TrendSet, shown: list[str]) -> None:
        self.values_list.blockSignals(True)
        self.values_list.clear()
        for c in ts.choices:
            item = QListWidgetItem(c.text(), self.values_list)
            item.setData(Qt.ItemDataRole.UserRole, c.name)
            flags = Qt.ItemFlag.ItemIsUserCheckable | Qt.ItemFlag.ItemIsSelectable
            if c.count:
                flags |= Qt.ItemFlag.ItemIsEnabled
                item.setToolTip(f"{c.label}: {c.count} runs with a value")
            else:
                item.setToolTip(f"{c.label}: no run of this point has a value")
            item.setFlags(flags)
            item.setCheckState(Qt.CheckState.Checked if c.name in shown
                               else Qt.CheckState.Unchecked)
        self.values_list.blockSignals(False)

    def _legend(self, trends: list[TrendData]) -> str:
        if not trends:
            return ""
        pal = self.ctx.palette
        parts = []
        for state, n in state_counts(trends[0]).items():
            glyph = LEGEND_GLYPHS[STATE_SYMBOLS.get(state, "d")]
            parts.append(f"<span style='color:{pal.state(state).name()}'>{glyph}</span> "
                         f"{pal.state_word(state)} {n}")
        return "Runs by state: " + " · ".join(parts)

    def _readout(self, ts: TrendSet) -> str:
        system = self.ctx.prefs.units
        blocks = []
        for td in ts.trends:
            factor, unit = display_unit(td.unit, system)
            levels = []
            for kind in ("alert", "danger"):
                level = getattr(td, kind)
                if level is not None:
                    levels.append(f"{kind} {level * factor:.3g}")
            head = f"<b>{value_label(td.value)}</b>"
            if levels:
                src = f" (band “{td.levels_from}”" + (f" of plan “{td.plan_name}”)"
                                                       if td.plan_name else ")")
                head += f" — {', '.join(levels)} {unit}{src if td.levels_from else ''}"
            else:
                head += " — the alarm plan sets no levels for this value"
            f = td.forecast
            text = head
            if f is not None:
                text += f"<br>{forecast_line(td)}<br><small>{f.reason}</small>"
            blocks.append(text)
        for value, message in ts.problems:
            blocks.append(f"<b>{value_label(value)}</b> — could not be read: {message}")
        return "<br><br>".join(blocks)

    # -- interaction ------------------------------------------------------------------
    def _clicked(self, run_id: str) -> None:
        self.run_id = run_id
        for plot in self.plots:
            plot.select(run_id)
        self.ctx.select_run(run_id)
        td = self.result.trends[0] if self.result is not None and self.result.trends else None
        when = ""
        if td is not None and run_id in td.run_ids:
            when = date_text(td.times_s[td.run_ids.index(run_id)]) + " "
        self.message.emit(f"Run {when}({run_id}) selected")

    def select_run(self, run_id: str) -> None:
        """Ring ``run_id`` on every plot (nothing is read)."""
        self.run_id = run_id
        for plot in self.plots:
            plot.select(run_id)

    def _value_ticked(self, _item: QListWidgetItem) -> None:
        chosen = []
        for i in range(self.values_list.count()):
            it = self.values_list.item(i)
            if it.checkState() == Qt.CheckState.Checked:
                chosen.append(it.data(Qt.ItemDataRole.UserRole))
        self.set_values(chosen)

    def set_values(self, values: list[str]) -> None:
        """Show these values (names as in the archive) and remember the choice."""
        self.values = list(dict.fromkeys(values))
        self.ctx.prefs.set(PREF_VALUES, ",".join(self.values))
        self.request()

    def _forecast_toggled(self, on: bool) -> None:
        self.ctx.prefs.set(PREF_FORECAST, bool(on))
        self.request()

    # -- CSV ------------------------------------------------------------------------
    def choose_csv(self, value: str) -> None:
        start = Path(self.ctx.prefs.get("trend/csv_folder", str(Path.home()), str))
        path, _ = QFileDialog.getSaveFileName(self, "Export the trend as CSV",
                                              str(start / csv_name(self.point or "", value)),
                                              "CSV files (*.csv)")
        if path:
            self.ctx.prefs.set("trend/csv_folder", str(Path(path).parent))
            self.export_csv(value, path)

    def export_csv(self, value: str, path: str | Path) -> None:
        """Write the trend of ``value`` now shown to ``path`` (in a job)."""
        tds = [td for td in (self.result.trends if self.result is not None else ())
               if td.value == value]
        if not tds:
            dialogs.show_error(self.window(), "The trend could not be exported",
                               f"{value_label(value)} is not shown for this point")
            return
        td = tds[0]

        def work(progress, cancel):
            return str(td.to_csv(path))

        def done(written: str) -> None:
            self.message.emit(f"Trend written to {written}")
            self.exported.emit(written)

        def failed(message: str, details: str) -> None:
            dialogs.show_error(self.window(), "The trend could not be exported", message,
                               path=str(path), advice="Choose a folder you can write to.",
                               details=details)
            self.failed.emit(message)

        self._csv_job = self.ctx.jobs.run(work, title="Export trend", on_done=done,
                                          on_error=failed)
