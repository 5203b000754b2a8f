"""The point-settings panel: where the sensor sits (location, direction, shaft), what it
measures (unit, sensitivity) and how its runs are analysed (Fmax, lines, window,
averages, overlap).  A change of the analysis settings leaves the stored results as
they were; the panel offers to analyse the point's runs again."""

from __future__ import annotations

import contextlib
import math

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QFrame,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from engine.errors import EngineError
from engine.recording import DIRECTIONS
from engine.spectrum import MAX_LINES, MIN_LINES
from engine.units import UNITS, VOLTAGE
from engine.windows import WINDOWS

from . import dialogs
from .context import AppContext
from .setup_dialogs import ChangeSummaryDialog, run_job
from .setup_jobs import ChangeSummary, reprocess_points
from .setup_widgets import number_text, parse_number

#: Point properties that change how runs are analysed (a change offers re-analysis).
ANALYSIS_KEYS = ("fmax_hz", "lines", "window", "averages", "overlap", "shaft", "channel")
#: Line counts offered (the trade's usual powers of two times 100; others may be typed).
LINE_CHOICES = (100, 200, 400, 800, 1600, 3200, 6400, 12800, 25600)


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


class PointSettings(QWidget):
    """Edit one point's properties.

    Signals
    -------
    saved(str)
        The point's properties were stored.
    reprocessed(object)
        A re-analysis ended (its :class:`~app.setup_jobs.ChangeSummary`).
    message(str)
    """

    saved = Signal(str)
    reprocessed = Signal(object)
    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.last_error = None
        self.dirty = False
        self.last_summary: ChangeSummaryDialog | None = None
        self.job = None
        self.location = QLineEdit(self)
        self.location.setToolTip("Where the sensor sits (pump DE …); a bearing of the machine "
                                 "model at this location gives the point its defect frequencies")
        self.direction = QComboBox(self)
        for d in ("",) + tuple(DIRECTIONS):
            self.direction.addItem({"": "not set", "H": "H (horizontal)", "V": "V (vertical)",
                                    "A": "A (axial)", "R": "R (radial)"}.get(d, d), d)
        self.shaft = QComboBox(self)
        self.shaft.setToolTip("The shaft whose speed the point's orders are of")
        self.unit = QComboBox(self)
        for sym, u in UNITS.items():
            if u.quantity != VOLTAGE:
                self.unit.addItem(f"{u.label} ({u.quantity})", sym)
        self.unit.setToolTip("Unit of what the sensor measures")
        self.sensitivity = QLineEdit(self)
        self.sensitivity.setPlaceholderText("not set")
        self.sensitivity.setToolTip("Volts per unit (0.1), or with units (100mV/g)")
        self.fmax = QLineEdit(self)
        self.fmax.setPlaceholderText("fs / 2.56")
        self.fmax.setToolTip("Highest frequency of the spectrum, Hz (empty: the recording's "
                             "sample rate / 2.56)")
        self.lines = QComboBox(self)
        self.lines.setEditable(True)
        self.lines.addItems([str(n) for n in LINE_CHOICES])
        self.lines.setToolTip(f"Spectrum lines, {MIN_LINES} … {MAX_LINES}")
        self.window_box = QComboBox(self)
        self.window_box.addItems(list(WINDOWS))
        self.averages = QSpinBox(self)
        self.averages.setRange(0, 10000)
        self.averages.setSpecialValueText("every frame")
        self.overlap = QSpinBox(self)
        self.overlap.setRange(0, 90)
        self.overlap.setSuffix(" %")
        self.derived = QLabel("", self)
        self.derived.setWordWrap(True)
        for w in (self.fmax, ):
            w.textChanged.connect(self._show_derived)
        self.lines.currentTextChanged.connect(self._show_derived)
        self.averages.valueChanged.connect(self._show_derived)
        self.overlap.valueChanged.connect(self._show_derived)
        self.save_button = QPushButton("Save point settings", self)
        self.revert_button = QPushButton("Revert", self)
        self.status = QLabel("", self)
        self.status.setWordWrap(True)
        self.status.setTextFormat(Qt.TextFormat.RichText)
        self.offer = QFrame(self)
        self.offer.setFrameShape(QFrame.Shape.StyledPanel)
        self.offer_text = QLabel("", self.offer)
        self.offer_text.setWordWrap(True)
        self.reprocess_button = QPushButton("Analyse the runs again", self.offer)
        ol = QHBoxLayout(self.offer)
        ol.addWidget(self.offer_text, 1)
        ol.addWidget(self.reprocess_button)
        self.offer.setVisible(False)

        where = QFormLayout()
        where.addRow("Location", self.location)
        where.addRow("Direction", self.direction)
        where.addRow("Shaft", self.shaft)
        where.addRow("Unit", self.unit)
        where.addRow("Sensitivity", self.sensitivity)
        how = QFormLayout()
        how.addRow("Fmax (Hz)", self.fmax)
        how.addRow("Lines", self.lines)
        how.addRow("Window", self.window_box)
        how.addRow("Averages", self.averages)
        how.addRow("Overlap", self.overlap)
        cols = QHBoxLayout()
        for title, form in (("Sensor", where), ("Analysis", how)):
            box = QVBoxLayout()
            box.addWidget(QLabel(f"<b>{title}</b>", self))
            box.addLayout(form)
            if title == "Analysis":
                box.addWidget(self.derived)
            box.addStretch(1)
            cols.addLayout(box, 1)
        buttons = QHBoxLayout()
        buttons.addWidget(self.status, 1)
        buttons.addWidget(self.revert_button)
        buttons.addWidget(self.save_button)
        inner = QWidget(self)
        inner.setMaximumWidth(1000)
        lay = QVBoxLayout(inner)
        lay.addLayout(cols)
        lay.addWidget(self.offer)
        lay.addLayout(buttons)
        lay.addStretch(1)
        outer = QHBoxLayout(self)
        outer.addWidget(inner, 1)
        outer.addStretch(0)
        for edit in (self.location, self.sensitivity, self.fmax):
            edit.textEdited.connect(self._mark_dirty)
        for box in (self.direction, self.shaft, self.unit, self.window_box, self.lines):
            box.activated.connect(self._mark_dirty)
        self.lines.editTextChanged.connect(self._mark_dirty)
        for spin in (self.averages, self.overlap):
            spin.valueChanged.connect(self._mark_dirty)
        self.save_button.clicked.connect(self.save)
        self.revert_button.clicked.connect(lambda: self.load(self.point))
        self.reprocess_button.clicked.connect(self.reprocess)

    # -- loading ------------------------------------------------------------------------
    def load(self, point: str | None) -> None:
        """Show the properties of ``point`` (nothing for None)."""
        if point != self.point:
            self.offer.setVisible(False)
        self.point = point
        self.setEnabled(point is not None)
        if point is None:
            self.status.setText("Pick a point in the asset tree.")
            return
        arc = self.ctx.archive()
        info = arc.point(point)
        p = info.props
        model = arc.machine_model(info.site, info.machine)
        shafts = [s.name for s in model.shafts] if model is not None else \
            list(arc.plant.machine(info.site, info.machine).ratios)
        self.location.setText(str(p.get("location", "")))
        self._choose(self.direction, p.get("direction", ""))
        self.shaft.clear()
        self.shaft.addItem("from the location's bearing", "")
        for s in shafts:
            self.shaft.addItem(s, s)
        self._choose(self.shaft, p.get("shaft", ""))
        self._choose(self.unit, p.get("unit", "g"))
        sens = p.get("sensitivity_v_per_unit", math.nan)
        self.sensitivity.setText("" if sens is None or math.isnan(sens) else f"{sens:g}")
        self.fmax.setText(number_text(p.get("fmax_hz")))
        self.lines.setCurrentText(str(p.get("lines", 1600)))
        self.window_box.setCurrentText(str(p.get("window", "hann")))
        self.averages.setValue(int(p.get("averages", 0)))
        self.overlap.setValue(int(round(100 * float(p.get("overlap", 0.5)))))
        self.status.setText(f"<b>{point}</b> — {len(arc.runs(point))} runs")
        self.dirty = False

    def _mark_dirty(self, *_args) -> None:
        """The panel differs from the stored settings (kept when the archive changes)."""
        if self.point is not None and not self.dirty:
            self.dirty = True
            self.status.setText(f"<b>{self.point}</b> — <i>edited, not saved</i>")

    def _show_derived(self, *_args) -> None:
        """Line spacing and record length of the settings (first principles: frames of
        2.56·lines samples at 2.56·Fmax samples per second last lines / Fmax s)."""
        try:
            fmax = parse_number(self.fmax.text(), "fmax_hz", optional=True)
            lines = parse_number(self.lines.currentText(), "lines", whole=True)
        except EngineError:
            self.derived.setText("")
            return
        if not fmax or fmax <= 0 or lines <= 0:
            self.derived.setText("Fmax from each recording's sample rate (fs / 2.56).")
            return
        frame_s = lines / fmax
        text = f"Line spacing {fmax / lines:.4g} Hz; one frame lasts {frame_s:.3g} s"
        n = self.averages.value()
        if n > 0:
            need = frame_s * (1 + (n - 1) * (1 - self.overlap.value() / 100.0))
            text += f"; {n} averages at {self.overlap.value()} % overlap need {need:.3g} s"
        self.derived.setText(text + ".")

    @staticmethod
    def _choose(box: QComboBox, value) -> None:
        i = box.findData(value)
        box.setCurrentIndex(i if i >= 0 else 0)

    def values(self) -> dict:
        """The panel's values as ``update_point`` keywords (InputError naming the field)."""
        sens = self.sensitivity.text().strip()
        return {"location": self.location.text().strip(),
                "direction": self.direction.currentData(),
                "shaft": self.shaft.currentData(),
                "unit": self.unit.currentData(),
                "sensitivity": sens if sens else math.nan,
                "fmax_hz": parse_number(self.fmax.text(), f"point {self.point}: fmax_hz",
                                        optional=True),
                "lines": parse_number(self.lines.currentText(), f"point {self.point}: lines",
                                      whole=True),
                "window": self.window_box.currentText(),
                "averages": self.averages.value(),
                "overlap": self.overlap.value() / 100.0}

    # -- saving -------------------------------------------------------------------------
    def save(self) -> bool:
        """Store the panel's values; offer re-analysis when analysis settings changed."""
        if self.point is None:
            return False
        point = self.point
        before = dict(self.ctx.archive().point(point).props)
        try:
            values = self.values()
            with contextlib.suppress(ValueError):     # text such as "100mV/g" stays text
                values["sensitivity"] = float(values["sensitivity"])
            with self.ctx.writer("shaftwatch-gui point settings") as arc:
                after = dict(arc.update_point(point, **values).props)
        except EngineError as exc:
            self.last_error = dialogs.show_error(
                self.window(), "The point settings were not saved", str(exc),
                advice="Correct the value and save again; nothing was stored.")
            return False
        changed = [k for k in ANALYSIS_KEYS if not _same(before.get(k), after.get(k))]
        self.dirty = False
        self.ctx.reload()
        self.load(point)
        runs = len(self.ctx.archive().runs(point))
        if changed and runs:
            self.offer_text.setText(
                f"The analysis settings changed ({', '.join(changed)}). The {runs} stored "
                "runs keep the results of the old settings until they are analysed again.")
            self.offer.setVisible(True)
        self.message.emit(f"Settings of {point} saved.")
        self.saved.emit(point)
        return True

    def reprocess(self):
        """Analyse the point's runs again with its settings and re-evaluate them (job)."""
        if self.point is None:
            return None
        path, points = self.ctx.archive_path, [self.point]
        self.job, _ = run_job(
            self.ctx, self, lambda progress, cancel: reprocess_points(
                path, points, progress=progress, cancel=cancel),
            title="Analyse runs again", text=f"Analysing the runs of {self.point} again…",
            on_done=self._reprocessed, failed_what="The runs were not analysed again",
            on_cancelled=lambda: self.message.emit("Analysis stopped; the runs done so far "
                                                   "keep their new results."))
        return self.job

    def _reprocessed(self, summary: ChangeSummary) -> None:
        self.offer.setVisible(False)
        self.ctx.reload()
        dlg = ChangeSummaryDialog(summary, self.ctx.palette, self.window())
        dlg.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
        dlg.open()
        self.last_summary = dlg
        self.reprocessed.emit(summary)
