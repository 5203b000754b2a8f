"""The compare tab: one run's velocity spectrum over a reference spectrum (the point's
baseline, or a chosen run), their difference in dB, and the largest rises with the
source each one sits on (:func:`engine.trends.compare`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from engine.alarms.baseline import MIN_BASELINE_RUNS
from engine.trends import Comparison, compare

from .context import AppContext
from .plots import make_plot, style_plot
from .point_panel import PointPanel
from .trend_data import date_text, display_unit

#: Reference entry of the baseline in the reference picker.
BASELINE = "baseline"
RISE_COLUMNS = ("Frequency (Hz)", "Order", "Current", "Reference", "Rise (dB)", "Source")


@dataclass
class CompareResult:
    """What the compare tab draws.

    Attributes
    ----------
    runs : list of (run_id, taken_s, state)
        The point's runs, in the order taken (for the pickers).
    comparison : Comparison or None
        None when the point has no run to compare.
    rpm : float
        Shaft speed of the compared run, rev/min (NaN unknown).
    """

    runs: list[tuple[str, float, str]]
    comparison: Comparison | None
    rpm: float = math.nan


def load_comparison(arc, point: str, run_id: str | None, reference: str) -> CompareResult:
    """The runs of ``point`` and the comparison of ``run_id`` (default its latest run)
    against ``reference`` (``"baseline"`` or a run id)."""
    rows = arc.value_rows(point)
    ids = [str(r) for r in rows.get("run_id", [])] if rows else []
    runs = [(r, float(t), str(s)) for r, t, s in
            zip(ids, rows.get("taken_s", []), rows.get("state", []))] if rows else []
    if not runs:
        return CompareResult(runs=[], comparison=None)
    rid = run_id if run_id in ids else ids[-1]
    comp = compare(arc, rid, reference)
    res = arc.results(rid)
    return CompareResult(runs=runs, comparison=comp,
                         rpm=float(res.rpm) if res is not None else math.nan)


def _item(text: str, value: float | None = None) -> QTableWidgetItem:
    it = QTableWidgetItem(text)
    it.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsSelectable)
    if value is not None:
        it.setData(Qt.ItemDataRole.UserRole, float(value))
        it.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    return it


class ComparePanel(PointPanel):
    """A run against a reference spectrum.

    Attributes
    ----------
    current_curve, reference_curve, db_curve : pg.PlotDataItem
    rises_table : QTableWidget
        One row per listed rise, largest first.
    """

    job_title = "Compare spectra"
    failure_text = "The spectra could not be compared"

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(ctx, parent)
        pal = ctx.palette
        self._chosen_run: str | None = None
        self.reference = BASELINE
        self.run_combo = QComboBox(self)
        self.run_combo.setToolTip("The run to compare")
        self.run_combo.setMinimumContentsLength(22)
        self.run_combo.activated.connect(self._run_chosen)
        self.ref_combo = QComboBox(self)
        self.ref_combo.setToolTip(f"Baseline: the power mean of the point's first "
                                  f"{MIN_BASELINE_RUNS} runs; or one run")
        self.ref_combo.setMinimumContentsLength(22)
        self.ref_combo.activated.connect(self._ref_chosen)
        self.log_box = QCheckBox("Log amplitude", self)
        self.log_box.setChecked(ctx.prefs.get("compare/log_y", True, bool))
        self.log_box.toggled.connect(self._log_toggled)
        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.header.setWordWrap(True)

        controls = QHBoxLayout()
        for text, w in (("Run", self.run_combo), ("against", self.ref_combo)):
            label = QLabel(text, self)
            label.setBuddy(w)
            controls.addWidget(label)
            controls.addWidget(w)
        controls.addWidget(self.log_box)
        controls.addStretch(1)

        self.spec_plot = make_plot(pal, title="Spectrum and reference",
                                   x_label="Frequency (Hz)", y_label="",
                                   tooltip="The run's velocity spectrum over the reference")
        self.legend = self.spec_plot.addLegend(offset=(-10, 10))
        self.reference_curve = self.spec_plot.plot([], [], name="reference")
        self.current_curve = self.spec_plot.plot([], [], name="run")
        self.db_plot = make_plot(pal, title="Difference", x_label="Frequency (Hz)",
                                 y_label="dB (run re reference)",
                                 tooltip="20·log10(run / reference) per line; above zero the "
                                         "run is higher")
        self.db_plot.setXLink(self.spec_plot)
        self.db_curve = self.db_plot.plot([], [])
        self.zero_line = pg.InfiniteLine(pos=0.0, angle=0, movable=False)
        self.db_plot.addItem(self.zero_line, ignoreBounds=True)
        self.rise_marks = pg.ScatterPlotItem(size=9, symbol="t1")
        self.db_plot.addItem(self.rise_marks)
        self.highlight: list[pg.InfiniteLine] = []
        self.rises_table = QTableWidget(0, len(RISE_COLUMNS), self)
        self.rises_table.setHorizontalHeaderLabels(RISE_COLUMNS)
        self.rises_table.verticalHeader().setVisible(False)
        self.rises_table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.rises_table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.rises_table.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents)
        self.rises_table.horizontalHeader().setStretchLastSection(True)
        self.rises_table.setToolTip("The largest rises: peaks of the run that stand above "
                                    "the reference, most dB first")
        self.rises_table.itemSelectionChanged.connect(self._rise_selected)

        plots = QSplitter(Qt.Orientation.Vertical, self)
        plots.addWidget(self.spec_plot)
        plots.addWidget(self.db_plot)
        plots.setSizes([420, 260])
        side = QWidget(self)
        side_lay = QVBoxLayout(side)
        side_lay.setContentsMargins(0, 0, 0, 0)
        side_lay.addWidget(QLabel("<b>Largest rises</b>", side))
        side_lay.addWidget(self.rises_table, 1)
        body = QSplitter(Qt.Orientation.Horizontal, self)
        body.addWidget(plots)
        body.addWidget(side)
        body.setSizes([900, 420])
        lay = QVBoxLayout(self)
        lay.addWidget(self.header)
        lay.addLayout(controls)
        lay.addWidget(body, 1)

    # -- requests ---------------------------------------------------------------------
    def set_point(self, point: str | None, run_id: str | None) -> None:
        if point != self.point:
            self.reference = BASELINE
        self._chosen_run = run_id
        super().set_point(point, run_id)

    def set_reference(self, reference: str) -> None:
        """Compare against ``"baseline"`` or a run id of the point."""
        self.reference = reference or BASELINE
        self.request()

    def set_run(self, run_id: str) -> None:
        """Compare this run of the point."""
        self._chosen_run = run_id
        self.request()

    def _run_chosen(self, index: int) -> None:
        self.set_run(self.run_combo.itemData(index))

    def _ref_chosen(self, index: int) -> None:
        self.set_reference(self.ref_combo.itemData(index))

    def _log_toggled(self, on: bool) -> None:
        self.ctx.prefs.set("compare/log_y", bool(on))
        self.redraw()

    def job_fn(self):
        arc, point = self.ctx.archive(), self.point
        run_id, reference = self._chosen_run, self.reference
        self.header.setText(f"<b>{point}</b> — comparing…")

        def work(progress, cancel) -> CompareResult:
            progress(0, 1, "reference spectrum")
            return load_comparison(arc, point, run_id, reference)
        return work

    # -- drawing ----------------------------------------------------------------------
    def clear(self, text: str) -> None:
        self.header.setText(text)
        for c in (self.current_curve, self.reference_curve, self.db_curve):
            c.setData([], [])
        self.rise_marks.setData([])
        self.rises_table.setRowCount(0)
        self._set_highlight(None)

    def _fill_combos(self, res: CompareResult) -> None:
        pal = self.ctx.palette
        comp = res.comparison
        self.run_combo.blockSignals(True)
        self.ref_combo.blockSignals(True)
        self.run_combo.clear()
        self.ref_combo.clear()
        self.ref_combo.addItem(f"Baseline (first {MIN_BASELINE_RUNS} runs)", BASELINE)
        for rid, t, s in reversed(res.runs):
            text = f"{date_text(t)} — {pal.state_word(s)}"
            self.run_combo.addItem(text, rid)
            self.ref_combo.addItem(text, rid)
        if comp is not None:
            self.run_combo.setCurrentIndex(max(self.run_combo.findData(comp.run_id), 0))
            self.ref_combo.setCurrentIndex(max(self.ref_combo.findData(comp.reference), 0))
        self.run_combo.blockSignals(False)
        self.ref_combo.blockSignals(False)

    def draw(self, res: CompareResult) -> None:
        self._fill_combos(res)
        comp = res.comparison
        if comp is None:
            self.clear(f"<b>{self.point}</b> — no analysed runs to compare.")
            return
        pal = self.ctx.palette
        for plot in (self.spec_plot, self.db_plot):
            style_plot(plot, pal)
        factor, unit = display_unit(comp.unit, self.ctx.prefs.units)
        log_y = self.log_box.isChecked()
        f = comp.frequency_hz
        floor = comp.floor * factor
        cur = np.maximum(comp.current * factor, floor) if log_y else comp.current * factor
        ref = (np.maximum(comp.reference_amplitude * factor, floor) if log_y
               else comp.reference_amplitude * factor)
        self.spec_plot.setLogMode(y=log_y)
        self.current_curve.setData(f, cur)
        self.current_curve.setPen(pg.mkPen(pal.trace(0), width=1.4))
        self.reference_curve.setData(f, ref)
        grey = pal.ui("foreground")
        grey.setAlpha(150)
        self.reference_curve.setPen(pg.mkPen(grey, width=1.2))
        self.spec_plot.setLabel("left", f"Velocity ({unit})")
        self.db_curve.setData(f, comp.db)
        self.db_curve.setPen(pg.mkPen(pal.trace(0), width=1.2))
        self.zero_line.setPen(pg.mkPen(pal.ui("foreground"), width=1,
                                       style=Qt.PenStyle.DotLine))
        self.rise_marks.setData([{"pos": (r["frequency_hz"], r["db"]),
                                  "brush": pg.mkBrush(pal.ui("cursor")),
                                  "pen": pg.mkPen(pal.ui("foreground"), width=0.8)}
                                 for r in comp.rises])
        self._fill_rises(comp, res.rpm, factor)
        when = date_text(comp.taken_s)
        if comp.reference == BASELINE:
            against = (f"the baseline (power mean of {len(comp.reference_runs)} runs, the "
                       f"first of the point)")
            ref_name = "baseline"
        else:
            times = {rid: t for rid, t, _ in res.runs}
            ref_name = f"run of {date_text(times.get(comp.reference, math.nan))}"
            against = f"the {ref_name}"
        self.legend.setLabelTextColor(pal.ui("foreground"))
        for curve, name in ((self.current_curve, f"run of {when}"),
                            (self.reference_curve, ref_name)):
            label = self.legend.getLabel(curve)
            if label is not None:
                label.setText(name)
        top = (f"largest rise {comp.rises[0]['db']:+.1f} dB at "
               f"{comp.rises[0]['frequency_hz']:.2f} Hz" if comp.rises else "no rise")
        self.header.setText(f"<b>{comp.point}</b> — run of {when} "
                            f"({pal.state_word(comp.state)}) against {against}: {top}.")
        self.spec_plot.getPlotItem().setXRange(float(f[0]), float(f[-1]), padding=0)
        self._set_highlight(None)

    def _fill_rises(self, comp: Comparison, rpm: float, factor: float) -> None:
        shaft_hz = rpm / 60.0 if math.isfinite(rpm) and rpm > 0 else math.nan
        table = self.rises_table
        table.blockSignals(True)
        table.setRowCount(len(comp.rises))
        for i, r in enumerate(comp.rises):
            order = r["frequency_hz"] / shaft_hz if math.isfinite(shaft_hz) else math.nan
            cells = (_item(f"{r['frequency_hz']:.2f}", r["frequency_hz"]),
                     _item(f"{order:.2f}×" if math.isfinite(order) else "—",
                           order if math.isfinite(order) else None),
                     _item(f"{r['current'] * factor:.3g}", r["current"] * factor),
                     _item(f"{r['reference'] * factor:.3g}", r["reference"] * factor),
                     _item(f"{r['db']:+.1f}", r["db"]),
                     _item(r.get("source", "") or "—"))
            for j, cell in enumerate(cells):
                table.setItem(i, j, cell)
        table.blockSignals(False)

    def _rise_selected(self) -> None:
        rows = {i.row() for i in self.rises_table.selectedItems()}
        comp = self.result.comparison if self.result is not None else None
        if not rows or comp is None:
            self._set_highlight(None)
            return
        self._set_highlight(comp.rises[min(rows)]["frequency_hz"])

    def _set_highlight(self, hz: float | None) -> None:
        for line, plot in zip(self.highlight, (self.spec_plot, self.db_plot)):
            plot.removeItem(line)
        self.highlight = []
        if hz is None:
            return
        colour = self.ctx.palette.ui("cursor")
        for plot in (self.spec_plot, self.db_plot):
            line = pg.InfiniteLine(pos=hz, angle=90, movable=False,
                                   pen=pg.mkPen(colour, width=2))
            plot.addItem(line, ignoreBounds=True)
            self.highlight.append(line)
