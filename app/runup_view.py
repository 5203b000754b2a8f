"""The run-up / coast-down view: speed profile, order spectrum, Campbell diagram and
order cuts of a run recorded with a tachometer channel.

The numbers come from :func:`app.runup_model.compute_runup`, run as a job
(``ctx.jobs``) with progress and cancel; the view only draws the
:class:`~app.runup_model.RunupResult`.  A run without a tachometer gets a message and,
on request, the speed estimated from the vibration itself
(:func:`engine.speed.estimate_speed`).
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (QComboBox, QDoubleSpinBox, QGridLayout, QHBoxLayout, QLabel,
                               QLineEdit, QMessageBox, QProgressBar, QPushButton, QSpinBox,
                               QStackedWidget, QVBoxLayout, QWidget)

from engine.errors import InputError
from engine.recording import Recording
from engine.speed import SpeedEstimate, estimate_speed

from .runup_model import (MARK_SHARE, NoTach, RunupResult, RunupSettings, analyse_run,
                          parse_orders)

#: Dynamic range of the Campbell colour map, dB below its largest value (our choice).
CAMPBELL_RANGE_DB = 50.0




def _theme_plot(plot: pg.PlotWidget, bg: QColor, fg: QColor) -> None:
    plot.setBackground(bg)
    for name in ("left", "bottom"):
        axis = plot.getAxis(name)
        axis.setPen(fg)
        axis.setTextPen(fg)
        axis.enableAutoSIPrefix(False)  # the unit is in the label; no "(x0.001)"
    item = plot.getPlotItem()
    item.setTitle(item.titleLabel.text, color=fg.name())


class RunupView(QWidget):
    """Order analysis of a run-up or coast-down.

    Signals
    -------
    computed(object)
        A :class:`RunupResult` was drawn.
    estimated(object)
        A :class:`~engine.speed.SpeedEstimate` of a run without a tach was shown.
    failed(str)
        A job failed; the message was shown to the user.
    stopped()
        A job was cancelled.
    """

    computed = Signal(object)
    estimated = Signal(object)
    failed = Signal(str)
    stopped = Signal()

    def __init__(self, ctx, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.result: RunupResult | None = None
        self.no_tach: NoTach | None = None
        self.job = None
        self.error_box: QMessageBox | None = None
        self._run: tuple[str, Recording, object] | None = None  # (run_id, rec, info) cache
        self._point: str | None = None
        self._run_id: str | None = None
        self._generation = 0
        self._build()
        self._restore_prefs()
        self._apply_theme()
        ctx.prefs_changed.connect(self._on_prefs_changed)
        self._show_message("Pick a point or a run recorded with a tachometer to see its "
                           "order analysis.", estimate=False)

    # -- layout ------------------------------------------------------------------------
    def _build(self) -> None:
        self.run_label = QLabel("")
        self.run_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.tach_combo = QComboBox()
        self.tach_combo.setMinimumContentsLength(14)
        self.tach_combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.tach_combo.setToolTip("Channel holding the tachometer pulses")
        self.ppr_spin = QSpinBox()
        self.ppr_spin.setRange(1, 720)
        self.ppr_spin.setToolTip("Tachometer pulses per shaft revolution")
        self.max_order_spin = QDoubleSpinBox()
        self.max_order_spin.setRange(1.0, 200.0)
        self.max_order_spin.setDecimals(1)
        self.max_order_spin.setSuffix(" ×")
        self.resolution_spin = QDoubleSpinBox()
        self.resolution_spin.setRange(0.005, 1.0)
        self.resolution_spin.setDecimals(3)
        self.resolution_spin.setSingleStep(0.01)
        self.resolution_spin.setToolTip("Line spacing of the order spectrum, orders")
        self.orders_edit = QLineEdit()
        self.orders_edit.setToolTip("Orders to cut and to draw on the Campbell diagram, "
                                    "e.g. 1, 2, 4")
        self.orders_edit.returnPressed.connect(self.compute)
        self.compute_button = QPushButton("Compute")
        self.compute_button.clicked.connect(self.compute)
        self.cancel_button = QPushButton("Stop")
        self.cancel_button.clicked.connect(self.cancel)
        self.cancel_button.setEnabled(False)
        self.progress_bar = QProgressBar()
        self.progress_bar.setMaximumWidth(180)
        self.progress_bar.setVisible(False)
        self.status_label = QLabel("")

        controls = QHBoxLayout()
        for text, w in (("Tach", self.tach_combo), ("Pulses/rev", self.ppr_spin),
                        ("Max order", self.max_order_spin),
                        ("Order resolution", self.resolution_spin),
                        ("Order cuts", self.orders_edit)):
            label = QLabel(text)
            label.setBuddy(w)
            controls.addWidget(label)
            controls.addWidget(w)
        controls.addWidget(self.compute_button)
        controls.addWidget(self.cancel_button)
        controls.addWidget(self.progress_bar)
        controls.addStretch(1)

        self.profile_plot = pg.PlotWidget(title="Speed profile")
        self.spectrum_plot = pg.PlotWidget(title="Order spectrum")
        self.campbell_plot = pg.PlotWidget(title="Campbell diagram")
        self.cut_plot = pg.PlotWidget(title="Order cuts")
        for plot in (self.profile_plot, self.spectrum_plot, self.campbell_plot, self.cut_plot):
            plot.showGrid(x=True, y=True, alpha=0.25)
            plot.setMinimumSize(260, 180)
        self.profile_plot.setLabel("bottom", "time (s)")
        self.profile_plot.setLabel("left", "speed (rpm)")
        self.spectrum_plot.setLabel("bottom", "order (×)")
        self.campbell_plot.setLabel("bottom", "speed (rpm)")
        self.campbell_plot.setLabel("left", "frequency (Hz)")
        self.cut_plot.setLabel("bottom", "speed (rpm)")
        self.cut_legend = self.cut_plot.addLegend(offset=(-10, 10))
        self.profile_curve = self.profile_plot.plot([], [])
        self.spectrum_curve = self.spectrum_plot.plot([], [])
        self.campbell_image = pg.ImageItem(axisOrder="col-major")
        self.campbell_plot.addItem(self.campbell_image)
        self.colour_bar = pg.ColorBarItem(values=(-CAMPBELL_RANGE_DB, 0.0), width=14,
                                          colorMap=pg.colormap.get("viridis"),
                                          label="dB re largest", interactive=False)
        self.colour_bar.setImageItem(self.campbell_image,
                                     insert_in=self.campbell_plot.getPlotItem())
        self.cut_curves: dict[float, pg.PlotDataItem] = {}
        self.resonance_points = pg.ScatterPlotItem(size=11, symbol="o")
        self._overlays: list = []  # marker lines and labels redrawn with each result

        grid = QGridLayout()
        grid.addWidget(self.profile_plot, 0, 0)
        grid.addWidget(self.spectrum_plot, 0, 1)
        grid.addWidget(self.campbell_plot, 1, 0)
        grid.addWidget(self.cut_plot, 1, 1)
        self.findings_label = QLabel("")
        self.findings_label.setWordWrap(True)
        self.findings_label.setTextInteractionFlags(
            Qt.TextInteractionFlag.TextSelectableByMouse)
        plots = QWidget()
        plots_layout = QVBoxLayout(plots)
        plots_layout.setContentsMargins(0, 0, 0, 0)
        plots_layout.addLayout(grid, 1)
        plots_layout.addWidget(self.findings_label)

        self.message_label = QLabel("")
        self.message_label.setWordWrap(True)
        self.message_label.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.estimate_button = QPushButton("Estimate the speed from the vibration")
        self.estimate_button.clicked.connect(self.estimate)
        self.estimate_label = QLabel("")
        self.estimate_label.setWordWrap(True)
        self.estimate_label.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.estimate_label.setTextInteractionFlags(
            Qt.TextInteractionFlag.TextSelectableByMouse)
        message = QWidget()
        m_layout = QVBoxLayout(message)
        m_layout.addStretch(1)
        m_layout.addWidget(self.message_label)
        m_layout.addWidget(self.estimate_button, 0, Qt.AlignmentFlag.AlignCenter)
        m_layout.addWidget(self.estimate_label)
        m_layout.addStretch(2)

        self.stack = QStackedWidget()
        self.plots_page, self.message_page = plots, message
        self.stack.addWidget(plots)
        self.stack.addWidget(message)
        layout = QVBoxLayout(self)
        layout.addWidget(self.run_label)
        layout.addLayout(controls)
        layout.addWidget(self.status_label)
        layout.addWidget(self.stack, 1)

    def _restore_prefs(self) -> None:
        p = self.ctx.prefs
        self.max_order_spin.setValue(p.get("runup/max_order", 10.0, float))
        self.resolution_spin.setValue(p.get("runup/order_resolution", 0.05, float))
        self.orders_edit.setText(p.get("runup/cut_orders", "1, 2", str))
        self.ppr_spin.setValue(1)

    def _apply_theme(self) -> None:
        pal = self.ctx.palette
        bg, fg = pal.ui("background"), pal.ui("foreground")
        for plot in (self.profile_plot, self.spectrum_plot, self.campbell_plot, self.cut_plot):
            _theme_plot(plot, bg, fg)
        self.profile_curve.setPen(pg.mkPen(pal.trace(0), width=2))
        self.spectrum_curve.setPen(pg.mkPen(pal.trace(0), width=1.5))
        self.cut_legend.setLabelTextColor(fg)
        self.resonance_points.setBrush(pg.mkBrush(pal.state("alert")))
        self.resonance_points.setPen(pg.mkPen(fg, width=1))

    def _on_prefs_changed(self) -> None:
        self._apply_theme()
        if self.result is not None:
            self._draw(self.result)

    # -- what is shown -----------------------------------------------------------------
    def settings(self) -> RunupSettings:
        """The settings the controls hold (InputError for a bad order list)."""
        tach = self.tach_combo.currentData()
        return RunupSettings(tach_channel=None if tach is None else int(tach),
                             pulses_per_rev=self.ppr_spin.value(),
                             max_order=self.max_order_spin.value(),
                             order_resolution=self.resolution_spin.value(),
                             cut_orders=parse_orders(self.orders_edit.text()))

    def show_point(self, point_path: str | None, run_id: str | None) -> None:
        """Show ``run_id``, or the latest run of ``point_path`` with a tachometer channel
        (the latest run when none has one); nothing when both are ``None``."""
        self._point, self._run_id = point_path, run_id
        if point_path is None and run_id is None:
            self._cancel_running()
            self.result = self.no_tach = None
            self.run_label.setText("")
            self._show_message("Pick a point or a run recorded with a tachometer to see its "
                               "order analysis.", estimate=False)
            return
        self.tach_combo.clear()
        self.compute()

    def compute(self) -> None:
        """Start the analysis of the run shown with the current settings (a job)."""
        if self._point is None and self._run_id is None:
            return
        try:
            settings = self.settings()
        except InputError as exc:
            self._report(str(exc))
            return
        p = self.ctx.prefs
        p.set("runup/max_order", settings.max_order)
        p.set("runup/order_resolution", settings.order_resolution)
        p.set("runup/cut_orders", ", ".join(f"{k:g}" for k in settings.cut_orders))
        arc, point, run_id, cached = self.ctx.archive(), self._point, self._run_id, self._run

        def work(progress, cancel):
            return analyse_run(arc, point, run_id, settings, progress, cancel, cached=cached)

        self._start(work, "Run-up analysis", self._on_computed)

    def estimate(self) -> None:
        """Estimate the speed of the run without a tach from its vibration (a job)."""
        if self.no_tach is None or self._run is None:
            return
        nt, rec = self.no_tach, self._run[1]

        def work(progress, cancel):
            progress(0, 0, "searching the spectrum for a harmonic series")
            return estimate_speed(rec.channel(nt.channel).samples, rec.fs_hz,
                                  near_rpm=nt.near_rpm, source=f"run {nt.run_id}")

        self._start(work, "Speed estimate", self._on_estimated)

    def cancel(self) -> None:
        """Ask the running job to stop."""
        if self.job is not None:
            self.job.cancel()
            self.status_label.setText("Stopping…")

    # -- jobs --------------------------------------------------------------------------
    def _cancel_running(self) -> None:
        self._generation += 1
        if self.job is not None:
            self.job.cancel()
            self.job = None
        self._busy(False)

    def _start(self, work, title: str, on_done) -> None:
        self._cancel_running()
        gen = self._generation

        def current(fn):
            return lambda *a: fn(*a) if gen == self._generation else None

        self._busy(True)
        self.job = self.ctx.jobs.run(work, title=title, on_done=current(on_done),
                                     on_error=current(self._on_error),
                                     on_progress=current(self._on_progress),
                                     on_cancelled=current(self._on_cancelled))

    def _busy(self, busy: bool) -> None:
        self.progress_bar.setVisible(busy)
        self.cancel_button.setEnabled(busy)
        self.compute_button.setEnabled(not busy)
        self.estimate_button.setEnabled(not busy)
        if busy:
            self.progress_bar.setRange(0, 0)

    def _on_progress(self, done: int, total: int, text: str) -> None:
        self.progress_bar.setRange(0, max(total, 0))
        self.progress_bar.setValue(done)
        self.status_label.setText(f"{text}…" if text and text != "done" else text)

    def _on_error(self, message: str, _details: str) -> None:
        self.job = None
        self._busy(False)
        self._report(message)

    def _report(self, message: str) -> None:
        self.status_label.setText(message)
        self.error_box = QMessageBox(QMessageBox.Icon.Warning, "Run-up analysis",
                                     "The run-up analysis could not be done.", parent=self)
        self.error_box.setInformativeText(
            f"{message}\n\nCheck the tachometer channel, the pulses per revolution and the "
            "order settings, then press Compute again.")
        self.error_box.open()
        self.failed.emit(message)

    def _on_cancelled(self) -> None:
        self.job = None
        self._busy(False)
        self.status_label.setText("Stopped." + (" The plots show the previous result."
                                                if self.result is not None else ""))
        self.stopped.emit()

    def _on_computed(self, payload) -> None:
        self.job = None
        self._busy(False)
        rec, info, result = payload
        self._run = (info.run_id, rec, info)
        self._run_id = info.run_id  # Compute again analyses this run, not a newer one
        self._fill_tach_combo(info, result)
        when = info.taken.strftime("%Y-%m-%d %H:%M")
        self.run_label.setText(f"<b>{info.point}</b> — run {info.run_id[:10]}, taken {when} "
                               f"UTC, {info.n_samples / info.sample_rate_hz:.3g} s at "
                               f"{info.sample_rate_hz:g} Hz")
        if isinstance(result, NoTach):
            self.result, self.no_tach = None, result
            self.status_label.setText("")
            self._show_message(
                "This run has no tachometer channel, so it cannot be order tracked "
                "(speed profile, order spectrum, Campbell diagram and order cuts need "
                "the tach pulses). Record run-ups with a tachometer channel, or "
                "estimate the shaft speed from the vibration below.", estimate=True)
            return
        self.no_tach, self.result = None, result
        self.stack.setCurrentWidget(self.plots_page)
        self._set_controls_enabled(True)
        self._draw(result)
        self.computed.emit(result)

    def _on_estimated(self, est: SpeedEstimate) -> None:
        self.job = None
        self._busy(False)
        self.status_label.setText("")
        self.estimate_label.setText(
            f"Estimated speed from the vibration: <b>{est.rpm:.0f} rpm</b> "
            f"({est.rpm / 60.0:.2f} Hz), confidence {est.confidence:.2f}<br>"
            f"<small>{est.method}. An estimate, not a measurement: check it against the "
            "machine's nameplate or a tachometer reading.</small>")
        self.estimated.emit(est)

    def _fill_tach_combo(self, info, result) -> None:
        chosen = result.tach_channel if isinstance(result, RunupResult) else None
        self.tach_combo.blockSignals(True)
        self.tach_combo.clear()
        for c in info.channels:
            tag = " (tach)" if c["index"] == info.tach_channel else ""
            self.tach_combo.addItem(f"{c['index']}: {c.get('name') or '—'}{tag}", c["index"])
        if chosen is not None:
            self.tach_combo.setCurrentIndex(self.tach_combo.findData(chosen))
        self.tach_combo.blockSignals(False)

    def _set_controls_enabled(self, on: bool) -> None:
        for w in (self.tach_combo, self.ppr_spin, self.max_order_spin, self.resolution_spin,
                  self.orders_edit, self.compute_button):
            w.setEnabled(on)

    def _show_message(self, text: str, *, estimate: bool) -> None:
        self.message_label.setText(text)
        self.estimate_button.setVisible(estimate)
        self.estimate_label.setText("")
        self.stack.setCurrentWidget(self.message_page)
        self._set_controls_enabled(False)

    # -- drawing -----------------------------------------------------------------------
    def _veil(self) -> QColor:
        """The plot background, part transparent: behind labels drawn over the image."""
        c = QColor(self.ctx.palette.ui("background"))
        c.setAlpha(200)
        return c

    def _clear_overlays(self) -> None:
        for plot, item in self._overlays:
            plot.removeItem(item)
        self._overlays = []

    def _add(self, plot: pg.PlotWidget, item) -> None:
        plot.addItem(item)
        self._overlays.append((plot, item))

    def _draw(self, r: RunupResult) -> None:
        pal = self.ctx.palette
        fg = pal.ui("foreground")
        self._clear_overlays()
        self.profile_curve.setData(r.profile_t_s, r.profile_rpm)
        s = r.spectrum
        self.spectrum_curve.setData(s.order, s.amplitude)
        self.spectrum_plot.setLabel("left", f"amplitude ({r.unit} peak)")
        self.spectrum_plot.setTitle(f"Order spectrum — {s.averages} averages, "
                                    f"{s.rpm_min:.0f}–{s.rpm_max:.0f} rpm", color=fg.name())
        marker = QColor(pal.marker("order"))
        marker.setAlpha(110)
        for k in r.cuts:
            line = pg.InfiniteLine(k.order, angle=90, movable=False,
                                   pen=pg.mkPen(marker, width=1, style=Qt.PenStyle.DashLine))
            self._add(self.spectrum_plot, line)
        if s.amplitude.size > 1:
            i = 1 + int(np.argmax(s.amplitude[1:]))
            label = pg.TextItem(f"{s.order[i]:.2f}×  {s.amplitude[i]:.3g} {r.unit}",
                                color=fg, anchor=(-0.05, 0.5))
            label.setPos(s.order[i], s.amplitude[i])
            self._add(self.spectrum_plot, label)
        self._draw_campbell(r)
        self._draw_cuts(r)
        self._draw_text(r)

    def _draw_campbell(self, r: RunupResult) -> None:
        pal = self.ctx.palette
        fg = pal.ui("foreground")
        if r.campbell_rpm.size == 0:
            self.campbell_image.clear()
            return
        top = float(r.campbell_amplitude.max()) or 1.0
        db = 20.0 * np.log10(np.maximum(r.campbell_amplitude / top, 1e-12))
        self.campbell_image.setImage(np.clip(db, -CAMPBELL_RANGE_DB, 0.0),
                                     levels=(-CAMPBELL_RANGE_DB, 0.0))
        step = (float(r.campbell_rpm[1] - r.campbell_rpm[0]) if r.campbell_rpm.size > 1
                else 1.0)
        df = float(r.campbell_hz[1] - r.campbell_hz[0])
        lo, hi = float(r.campbell_rpm[0]) - step / 2, float(r.campbell_rpm[-1]) + step / 2
        fmax = float(r.campbell_hz[-1])
        self.campbell_image.setRect(QRectF(lo, -df / 2, hi - lo, fmax + df))
        self.campbell_plot.setTitle(f"Campbell diagram — {r.campbell_rpm.size} spectra, "
                                    f"{r.campbell_lines} lines to {fmax:.0f} Hz",
                                    color=fg.name())
        # Shown at first up to two orders above the highest drawn (our choice; the rest
        # is a scroll away), so that the crossings near the bottom stay readable.
        top_order = max((c.order for c in r.cuts), default=1.0) + 2.0
        shown = min(fmax, top_order * hi / 60.0)
        for i, c in enumerate(r.cuts):
            k = c.order
            end = min(hi, 60.0 * fmax / k)  # f = k·rpm/60, clipped at Fmax
            colour = pal.trace(i + 1)
            self._add(self.campbell_plot, pg.PlotDataItem(
                [lo, end], [k * lo / 60.0, k * end / 60.0], pen=pg.mkPen(colour, width=1.5)))
            label = pg.TextItem(f"{k:g}×", color=colour, anchor=(1.1, 1.0),
                                fill=pg.mkBrush(self._veil()))
            at = min(end, 60.0 * shown / k)
            label.setPos(at, k * at / 60.0)
            self._add(self.campbell_plot, label)
        for f in r.resonance_hz():
            line = pg.InfiniteLine(f, angle=0, movable=False,
                                   pen=pg.mkPen(pal.state("alert"), width=1.5,
                                                style=Qt.PenStyle.DashLine))
            self._add(self.campbell_plot, line)
            text = pg.TextItem(f"resonance ≈ {f:.1f} Hz", color=fg, anchor=(1.0, 0.0),
                               fill=pg.mkBrush(self._veil()))
            text.setPos(hi, f)
            self._add(self.campbell_plot, text)
        self.campbell_plot.setXRange(lo, hi, padding=0)
        self.campbell_plot.setYRange(0, shown, padding=0)

    def _draw_cuts(self, r: RunupResult) -> None:
        pal = self.ctx.palette
        fg = pal.ui("foreground")
        for curve in self.cut_curves.values():
            self.cut_plot.removeItem(curve)
        self.cut_curves = {}
        self.cut_plot.removeItem(self.resonance_points)
        spots = []
        for i, c in enumerate(r.cuts):
            curve = self.cut_plot.plot(c.rpm_binned, c.amplitude_binned,
                                       pen=pg.mkPen(pal.trace(i + 1), width=2),
                                       name=f"{c.order:g}×")
            self.cut_curves[c.order] = curve
            for f in c.resonances:
                v = f.values
                spots.append({"pos": (v["rpm"], v["amplitude"])})
                label = pg.TextItem(f"{v['frequency_hz']:.1f} Hz at {v['rpm']:.0f} rpm",
                                    color=fg, anchor=(-0.08, 0.5))
                label.setPos(v["rpm"], v["amplitude"])
                self._add(self.cut_plot, label)
        self.resonance_points.setData(spots)
        self.cut_plot.addItem(self.resonance_points)
        self.cut_plot.setLabel("left", f"amplitude ({r.unit} peak)")

    def _draw_text(self, r: RunupResult) -> None:
        lines = []
        for c in r.cuts:
            for f in c.resonances:
                lines.append(f"<b>{f.title}</b> ({c.order:g}× cut, "
                             f"{f.values['ratio']:.1f}× its neighbours). {f.recommendation}")
            if c.unmarked:
                lines.append(f"{c.order:g}× cut: {c.unmarked} smaller bump(s) under "
                             f"{MARK_SHARE:.0%} of the cut's largest value not marked.")
        if not any(c.resonances for c in r.cuts):
            lines.append("No resonance crossing found in the order cuts.")
        lines += [f"<i>{w}</i>" for w in r.warnings]
        self.findings_label.setText("<br>".join(lines))
        self.status_label.setText(
            f"Speed {r.profile_rpm.min():.0f}–{r.profile_rpm.max():.0f} rpm; channel "
            f"{r.channel} in {r.unit}, tach channel {r.tach_channel}.")
