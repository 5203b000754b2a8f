"""The alarm-plan editor: the point's plan in force as a table and as bands drawn on a
run's spectrum, edited in either; ISO 20816 defaults, levels learnt from the first runs,
plan files, copying to other points; and "Apply", which stores the plan and
re-evaluates the history in a job, then shows what changed.

The editor keeps the plan's bands as a list of :class:`engine.alarms.plan.Band`; the
table and the drawing both show that list and both edit it.  Nothing is stored before
Apply, and Apply stores nothing when the plan does not validate.
"""

from __future__ import annotations

import math
from dataclasses import replace
from datetime import UTC, datetime

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSplitter,
    QVBoxLayout,
    QWidget,
)

from engine.alarms.plan import AlarmPlan, Band
from engine.errors import InputError
from engine.pipeline import plan_in_force, point_setup, remeasure
from engine.results import band_value_name
from engine.units import unit as lookup_unit

from . import dialogs
from .context import AppContext
from .plan_actions import PlanActions
from .plan_plot import BandEditLayer, DrawnBand
from .plan_table import PlanTable, located, with_measure
from .plots import make_plot, set_title, style_plot
from .run_compute import level_in
from .setup_widgets import parse_number, round_sig

#: Measures drawn on the velocity spectrum (the others are edited in the table only).
DRAWN_MEASURES = ("band_rms", "band_peak", "overall")


def _finite(v) -> float | None:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) and f > 0 else None


class PlanEditor(PlanActions, QWidget):
    """Edit and apply the alarm plan of one point.

    Signals
    -------
    applied(object)
        Apply ended; its :class:`~app.setup_jobs.ChangeSummary`.
    message(str)
    """

    applied = Signal(object)
    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.run_id: str | None = None
        self.results = None
        self.shaft_rpm: float | None = None
        self.fmax_hz: float | None = None
        self.bands: list[Band] = []
        self.origin, self.note, self.own_plan, self.dirty = "", "", False, False
        self.problems: dict[tuple[int, str], str] = {}
        self.last_error = self.last_summary = self.job = None
        self._setup = None
        pal = ctx.palette
        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setWordWrap(True)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.name_edit = QLineEdit(self)
        self.name_edit.setToolTip("Name of the plan")
        self.plot = make_plot(pal, title="Spectrum", x_label="Frequency (Hz)",
                              y_label="mm/s RMS", tooltip="Drag a band or its edges; drag the "
                              "dashed (alert) and solid (danger) lines up or down")
        self.curve = self.plot.plot([], [], pen=pg.mkPen(pal.trace(0), width=1))
        self.curve.setZValue(15)            # over the band shading, under the level lines
        self.layer = BandEditLayer(self.plot, pal, self)
        self.readout = QLabel("", self)
        self.readout.setWordWrap(True)
        self.zoom_button = QPushButton("Zoom to band", self)
        self.zoom_button.setToolTip("Show the band selected in the table (or the narrowest "
                                    "band) with some room around it")
        self.full_button = QPushButton("Full range", self)
        self.full_button.setToolTip("Show the whole spectrum")
        self.zoom_button.clicked.connect(lambda: self.zoom_to_band())
        self.full_button.clicked.connect(self.full_range)
        self.table = PlanTable(self)
        self.validation = QLabel("", self)
        self.validation.setWordWrap(True)
        self.validation.setTextFormat(Qt.TextFormat.RichText)
        self.validation.setObjectName("plan-validation")
        self.changes = QLabel("", self)
        self.changes.setWordWrap(True)
        self.buttons: dict[str, QPushButton] = {}
        row = QHBoxLayout()
        for key, text, tip, slot in (
                ("iso", "ISO defaults", "Overall velocity band with the ISO 20816-3 alert and "
                 "danger of the machine's group and foundation (generic limits)",
                 self.iso_defaults),
                ("baseline", "Learn from first runs…", "Levels of every band from the "
                 "point's first runs (statistical baseline)", self.ask_baseline),
                ("import", "Import…", "Read a plan file (JSON or TOML)", self.import_plan),
                ("export", "Export…", "Write the plan to a file", self.export_plan),
                ("copy", "Copy to points…", "Store this plan for other points too",
                 self.ask_copy),
                ("revert", "Revert", "Show the stored plan again", self.revert),
                ("apply", "Apply", "Store the plan and evaluate the point's history again",
                 self.apply)):
            b = QPushButton(text, self)
            b.setToolTip(tip)
            b.clicked.connect(lambda _=False, s=slot: s())
            row.addWidget(b)
            self.buttons[key] = b
        self.buttons["apply"].setDefault(True)
        self._layout(row)
        self.table.add_button.clicked.disconnect()
        self.table.remove_button.clicked.disconnect()
        self.table.add_button.clicked.connect(lambda: self.add_band())
        self.table.remove_button.clicked.connect(lambda: self.remove_bands())
        self.table.edited.connect(self._cell_edited)
        self.table.table.itemSelectionChanged.connect(self._redraw)
        self.name_edit.textEdited.connect(lambda _t: self._edited())
        self.layer.level_edited.connect(self._level_dragged)
        self.layer.edges_edited.connect(self._edges_dragged)
        self.layer.level_moving.connect(self._level_moving)
        self.layer.band_clicked.connect(self.table.table.selectRow)
        ctx.prefs_changed.connect(self._prefs_changed)

    def _layout(self, buttons: QHBoxLayout) -> None:
        top = QHBoxLayout()
        top.addWidget(self.header, 1)
        top.addWidget(QLabel("Plan name:", self))
        top.addWidget(self.name_edit)
        plot_box = QWidget(self)
        pl = QVBoxLayout(plot_box)
        pl.setContentsMargins(0, 0, 0, 0)
        pl.addWidget(self.plot, 1)
        under = QHBoxLayout()
        under.addWidget(self.readout, 1)
        under.addWidget(self.zoom_button)
        under.addWidget(self.full_button)
        pl.addLayout(under)
        table_box = QWidget(self)
        tl = QVBoxLayout(table_box)
        tl.setContentsMargins(0, 0, 0, 0)
        tl.addWidget(self.table, 1)
        tl.addWidget(self.validation)
        tl.addLayout(buttons)
        tl.addWidget(self.changes)
        split = QSplitter(Qt.Orientation.Vertical, self)
        split.addWidget(plot_box)
        split.addWidget(table_box)
        split.setSizes([430, 300])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addLayout(top)
        lay.addWidget(split, 1)

    def _prefs_changed(self) -> None:
        pal = self.ctx.palette
        style_plot(self.plot, pal)
        self.curve.setPen(pg.mkPen(pal.trace(0), width=1))
        self.layer.palette = pal
        self.layer.clear()                  # rebuilt with the new colours
        self._refresh()

    # -- loading ------------------------------------------------------------------------
    def load(self, point: str | None, run_id: str | None = None) -> None:
        """Show the plan in force of ``point`` on run ``run_id`` (default: the latest
        analysed run)."""
        if point != self.point:
            self.changes.setText("")
        self.point, self.dirty, self.problems = point, False, {}
        self.setEnabled(point is not None)
        self.results = self._setup = None
        self.shaft_rpm = self.fmax_hz = None
        if point is None:
            self.header.setText("Pick a point in the asset tree.")
            self._set_plan(None)
            return
        arc = self.ctx.archive()
        info = arc.point(point)
        fmax = info.props.get("fmax_hz")
        self.fmax_hz = _finite(fmax)
        self.own_plan = arc.plan(point) is not None
        rows = arc.value_rows(point)
        ids = [str(r) for r in rows["run_id"]] if rows and rows["run_id"].size else []
        if ids:
            times = {str(r): float(t) for r, t in zip(rows["run_id"], rows["taken_s"])}
            rid = run_id if run_id in times else max(ids, key=times.get)
            self.results = arc.results(rid)
        self.run_id = self.results.run_id if self.results is not None else None
        if self.results is not None:
            self.shaft_rpm = _finite(self.results.rpm)
            if self.fmax_hz is None and self.results.spectrum is not None:
                self.fmax_hz = float(self.results.spectrum.fmax_hz)
        self._setup = point_setup(arc, point)
        self._set_plan(plan_in_force(arc, point))
        self._draw_spectrum()
        self._refresh()

    def _set_plan(self, plan: AlarmPlan | None) -> None:
        self.bands = list(plan.bands) if plan is not None else []
        self.origin = plan.origin if plan is not None else "user"
        self.note = plan.note if plan is not None else ""
        self.name_edit.setText(plan.name if plan is not None else
                               (f"{self.point.split('/', 1)[-1]}" if self.point else ""))
        self.table.set_bands(self.bands)
        self._header()

    def _header(self) -> None:
        if self.point is None:
            return
        whose = "The point's own plan" if self.own_plan else \
            "No plan of its own: the machine's ISO default is in force (Apply stores it)"
        if not self.bands and not self.own_plan:
            whose = "No plan in force: add bands or take the ISO defaults"
        edited = " — <i>edited, not applied</i>" if self.dirty else ""
        self.header.setText(f"{whose}; origin: {self.origin}{edited}")
        self.header.setToolTip(self.note)

    def _draw_spectrum(self) -> None:
        spec = self.results.spectrum if self.results is not None else None
        if spec is None:
            self.curve.setData([], [])
            set_title(self.plot, "No analysed run: bands are edited in the table only")
            return
        self.curve.setData(spec.frequency_hz, spec.amplitude)
        self.layer.x_bounds = (0.0, float(spec.fmax_hz))
        taken = datetime.fromtimestamp(self.results.taken_s, tz=UTC).strftime("%Y-%m-%d")
        speed = f", shaft {self.shaft_rpm:.0f} rpm" if self.shaft_rpm else ", speed unknown"
        set_title(self.plot, f"Run of {taken}{speed} — {spec.lines} lines, Fmax "
                             f"{spec.fmax_hz:g} Hz")
        self.plot.getPlotItem().setLabel(
            "left", f"{lookup_unit(spec.unit).label} {spec.scale.upper()}")
        self.plot.setXRange(0.0, float(spec.fmax_hz), padding=0.01)

    def zoom_to_band(self, index: int | None = None) -> bool:
        """Show band ``index`` (default: the selected band, else the narrowest drawn)."""
        drawn, _ = self._drawn()
        if not drawn:
            return False
        if index is None:
            rows = sorted({ix.row() for ix in self.table.table.selectedIndexes()})
            index = rows[0] if rows else min(drawn, key=lambda d: d.high_hz - d.low_hz).index
        band = next((d for d in drawn if d.index == index), None)
        if band is None:
            return False
        margin = 1.5 * (band.high_hz - band.low_hz)
        self.plot.setXRange(max(band.low_hz - margin, 0.0), band.high_hz + margin, padding=0)
        return True

    def full_range(self) -> None:
        spec = self.results.spectrum if self.results is not None else None
        if spec is not None:
            self.plot.setXRange(0.0, float(spec.fmax_hz), padding=0.01)

    # -- the plan -----------------------------------------------------------------------
    def plan(self) -> AlarmPlan:
        """The plan as edited (not validated); InputError for a cell that cannot be read."""
        if self.problems:
            raise InputError(next(iter(self.problems.values())))
        name = self.name_edit.text().strip()
        return AlarmPlan(name=name, bands=tuple(self.bands), origin=self.origin or "user",
                         note=self.note)

    def checked_plan(self) -> AlarmPlan:
        """The plan as edited, validated against the point's Fmax at the run's speed."""
        plan = self.plan()
        plan.validate(fmax_hz=self.fmax_hz, rpm=self.shaft_rpm,
                      source=f"alarm plan of {self.point}")
        return plan

    def problem(self) -> str:
        """The first problem of the plan as edited ("" when it validates)."""
        try:
            self.checked_plan()
        except InputError as exc:
            return str(exc)
        return ""

    def band_index(self, name: str) -> int:
        return [b.name for b in self.bands].index(name)

    # -- refreshing ---------------------------------------------------------------------
    def _edited(self, *, by_hand: bool = True) -> None:
        self.dirty = True
        if by_hand:
            self.origin = "user"
        self._header()
        self._refresh()

    def _refresh(self) -> None:
        self._redraw()
        self._show_values()
        self._show_problem()

    def _spectrum_units(self) -> tuple[str, str]:
        spec = self.results.spectrum if self.results is not None else None
        return (spec.unit, spec.scale) if spec is not None else ("mm/s", "rms")

    def _drawn(self) -> tuple[list[DrawnBand], list[str]]:
        selected = {ix.row() for ix in self.table.table.selectedIndexes()}
        su, ss = self._spectrum_units()
        out, left = [], []
        for i, b in enumerate(self.bands):
            edges = None
            if b.measure in DRAWN_MEASURES and self.results is not None:
                try:
                    edges = b.edges_hz(self.shaft_rpm or math.nan)
                except (TypeError, ValueError):
                    edges = None
            if edges is None or not edges[0] < edges[1]:
                left.append(b.name)
                continue
            alert = level_in(b.alert, b.unit, b.scale, su, ss) if _finite(b.alert) else None
            danger = level_in(b.danger, b.unit, b.scale, su, ss) if _finite(b.danger) else None
            if alert is None or danger is None:
                alert = danger = None
            where = (f"{b.low:g}–{b.high:g} orders" if b.basis == "order" and b.low is not None
                     else f"{edges[0]:.1f}–{edges[1]:.1f} Hz")
            tip = f"{b.name}: {b.measure.replace('_', ' ')}, {where}; alert {b.alert:g}, " \
                  f"danger {b.danger:g} {b.unit} {b.scale.upper()}"
            if alert is None:
                tip += " (levels in another quantity: edit them in the table)"
            out.append(DrawnBand(i, b.name, edges[0], edges[1], alert, danger, tip,
                                 selected=i in selected))
        return out, left

    def _redraw(self) -> None:
        drawn, left = self._drawn()
        self.layer.set_bands(drawn)
        spec = self.results.spectrum if self.results is not None else None
        top = float(np.max(spec.amplitude)) if spec is not None and spec.amplitude.size else 1.0
        levels = [d.danger for d in drawn if d.danger is not None]
        self.plot.setYRange(0.0, 1.15 * max([top] + levels), padding=0)
        self.readout.setText(("Edited in the table only (no frequency band on this "
                              "spectrum): " + ", ".join(left)) if left else "")

    def _show_values(self) -> None:
        values = []
        for b in self.bands:
            values.append(self._measure(b))
        self.table.set_values(values, [b.unit for b in self.bands])
        for i, (b, v) in enumerate(zip(self.bands, values)):
            state = ""
            if v is not None and math.isfinite(v) and _finite(b.alert) and _finite(b.danger):
                state = "danger" if v >= b.danger else "alert" if v >= b.alert else "ok"
            item = self.table.table.item(i, self.table.keys.index("value"))
            if item is not None:
                item.setForeground(self.ctx.palette.state(state))

    def _measure(self, b: Band) -> float | None:
        """The band's value in the run drawn, measured from its stored spectra."""
        if self.results is None or self._setup is None:
            return None
        try:
            one = AlarmPlan(name="one band", bands=(b,))
            fresh = remeasure(self.ctx.archive(), self.results, replace(self._setup, plan=one))
        except (InputError, ValueError, TypeError):
            return None
        v = fresh.value(band_value_name(b.name))
        return v if math.isfinite(v) else None

    def _show_problem(self) -> None:
        self.table.clear_marks()
        for (row, key), text in self.problems.items():
            self.table.mark(row, key, text)
        text = self.problem() if self.point is not None else ""
        danger = self.ctx.palette.state("danger").name()
        if text:
            where = located(text, [b.name for b in self.bands])
            if where is not None:
                self.table.mark(*where, text)
            self.validation.setText(f"<span style='color:{danger}'>✗ {text}</span>")
        elif self.point is not None:
            self.validation.setText(f"✓ The plan is valid: {len(self.bands)} band"
                                    f"{'s' if len(self.bands) != 1 else ''}.")
        self.buttons["apply"].setEnabled(not text and self.point is not None)

    # -- table edits --------------------------------------------------------------------
    def _cell_edited(self, row: int, key: str) -> None:
        if key == "value" or not 0 <= row < len(self.bands):
            return
        b, text = self.bands[row], self.table.text(row, key)
        self.problems.pop((row, key), None)
        try:
            if key in ("low", "high", "alert", "danger"):
                v = parse_number(text, f"alarm plan of {self.point}: band {b.name!r}: {key}",
                                 optional=key in ("low", "high"))
                b = replace(b, **{key: v})
            elif key == "measure":
                b = with_measure(b, text.lower())
            elif key == "basis":
                b = self._rebased(b, text.lower())
            elif key == "unit":
                b = replace(b, unit=text if text == "1" else self._unit_symbol(text))
            elif key == "name":
                b = replace(b, name=text)
            else:
                b = replace(b, **{key: text.lower()})
        except InputError as exc:
            self.problems[(row, key)] = str(exc)
        else:
            self.bands[row] = b
            self.table.set_band(row, b)
        self._edited()

    @staticmethod
    def _unit_symbol(text: str) -> str:
        try:
            return lookup_unit(text).symbol
        except InputError:
            return text                      # kept as typed: validation names it

    def _rebased(self, b: Band, basis: str) -> Band:
        """``b`` in another basis, its edges converted at the run's speed."""
        if basis == b.basis or b.low is None or b.high is None or not self.shaft_rpm:
            return replace(b, basis=basis)
        shaft_hz = self.shaft_rpm / 60.0
        if basis == "order":
            return replace(b, basis=basis, low=round(b.low / shaft_hz, 3),
                           high=round(b.high / shaft_hz, 3))
        if basis == "hz":
            return replace(b, basis=basis, low=round(b.low * shaft_hz, 2),
                           high=round(b.high * shaft_hz, 2))
        return replace(b, basis=basis)

    # -- drawing edits ------------------------------------------------------------------
    def _level_moving(self, index: int, level: str, y: float) -> None:
        if 0 <= index < len(self.bands):
            su, ss = self._spectrum_units()
            b = self.bands[index]
            v = level_in(y, su, ss, b.unit, b.scale)
            if v is not None:
                self.readout.setText(f"{b.name}: {level} {v:.3g} {b.unit} {b.scale.upper()}")

    def _level_dragged(self, index: int, level: str, y: float) -> None:
        if not 0 <= index < len(self.bands):
            return
        su, ss = self._spectrum_units()
        b = self.bands[index]
        v = level_in(y, su, ss, b.unit, b.scale)
        if v is None or not v > 0:
            return
        self.bands[index] = replace(b, **{level: round_sig(v, 3)})
        self.problems.pop((index, level), None)
        self.table.set_band(index, self.bands[index])
        self._edited()

    def _edges_dragged(self, index: int, low_hz: float, high_hz: float) -> None:
        if not 0 <= index < len(self.bands):
            return
        b = self.bands[index]
        if b.basis == "order" and b.low is not None and self.shaft_rpm:
            shaft_hz = self.shaft_rpm / 60.0
            b = replace(b, low=round(low_hz / shaft_hz, 3), high=round(high_hz / shaft_hz, 3))
        else:
            b = replace(b, basis="hz", low=round(low_hz, 1), high=round(high_hz, 1))
        self.bands[index] = b
        for key in ("low", "high", "basis"):
            self.problems.pop((index, key), None)
        self.table.set_band(index, b)
        self._edited()

    # -- buttons ------------------------------------------------------------------------
    def _error(self, what: str, message: str, advice: str = "") -> None:
        self.last_error = dialogs.show_error(self.window(), what, message,
                                             advice=advice or dialogs.advice_for(message))

    def add_band(self, band: Band | None = None) -> int:
        """Add ``band`` (default: band RMS over 2.9–3.1 orders, or 100–200 Hz without a
        speed, with levels 2.5× and 5× its value in the run drawn)."""
        if band is None:
            names = {b.name for b in self.bands}
            n = len(self.bands) + 1
            while f"band {n}" in names:
                n += 1
            su, _ = self._spectrum_units()
            band = (Band(f"band {n}", "band_rms", 1.0, 2.0, unit=su, low=2.9, high=3.1,
                         basis="order") if self.shaft_rpm else
                    Band(f"band {n}", "band_rms", 1.0, 2.0, unit=su, low=100.0, high=200.0))
            v = self._measure(band)
            if v is not None and v > 0:     # the ratio-method factors, common practice
                band = replace(band, alert=round_sig(2.5 * v), danger=round_sig(5.0 * v))
        self.bands.append(band)
        self.table.set_bands(self.bands)
        self.table.table.selectRow(len(self.bands) - 1)
        self._edited()
        return len(self.bands) - 1

    def remove_bands(self, rows: list[int] | None = None) -> None:
        """Remove the bands of ``rows`` (default: the selected rows)."""
        if rows is None:
            rows = sorted({ix.row() for ix in self.table.table.selectedIndexes()})
        rows = [r for r in rows if 0 <= r < len(self.bands)]
        if not rows:
            self.message.emit("Select the bands to remove in the table.")
            return
        self.bands = [b for i, b in enumerate(self.bands) if i not in rows]
        self.problems = {}
        self.table.set_bands(self.bands)
        self._edited()

    def revert(self) -> None:
        self.load(self.point, self.run_id)
