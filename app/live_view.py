"""The live view: a source (simulated machine, sound card, replayed recording), its live
waveform, averaged spectrum and scrolling waterfall, and "Keep" to store the latest
seconds as a run of a point.

Sources write blocks into a :class:`~app.live_sources.SampleRing` from their own
thread; a QTimer on the GUI thread drains the ring every :attr:`LiveView.UPDATE_MS`,
feeds the new samples to the :class:`~app.live_spectrum.LiveSpectrum` (which transforms
only new frames) and redraws only what changed.
"""

from __future__ import annotations

import time
from collections import deque
from datetime import UTC, datetime, timedelta

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer
from PySide6.QtGui import QPen
from PySide6.QtWidgets import (QHBoxLayout, QLabel, QMessageBox, QPushButton, QScrollArea,
                               QSizePolicy, QVBoxLayout, QWidget)

from engine.errors import EngineError, InputError
from engine.pipeline import process_new_runs
from engine.recording import Channel, Recording
from engine.units import unit

from .live_panels import KeepBar, SourcePanel, SpectrumPanel
from .live_soundcard import sound_card_status
from .live_sources import BLOCK_S, LiveSource, SampleRing, SimulatedSource
from .live_spectrum import LiveSpectrum
from .live_waterfall import WaterfallBuffer, WaterfallPlot


class _Range:
    """A y range that follows the data with hysteresis, so that the axis is redrawn
    only when the data outgrow it or shrink well inside it."""

    def __init__(self, plot: pg.PlotItem, *, symmetric: bool) -> None:
        self.plot, self.symmetric, self.top = plot, symmetric, 0.0

    def reset(self) -> None:
        self.top = 0.0

    def fit(self, peak: float) -> None:
        if not np.isfinite(peak) or peak <= 0.0:
            return
        if peak > self.top or peak < 0.3 * self.top:
            self.top = 1.25 * peak
            lo = -self.top if self.symmetric else 0.0
            self.plot.setYRange(lo, self.top, padding=0.0)


class LiveView(QWidget):
    """Live waveform, spectrum and waterfall of a chosen source.

    Parameters
    ----------
    ctx : AppContext
    parent : QWidget, optional
    waterfall_rows : int, keyword-only
        Spectra the waterfall shows.

    Attributes
    ----------
    spectrum : LiveSpectrum or None
        The running spectrum (rebuilt when a setting changes).
    waterfall : WaterfallBuffer or None
    draw_ms : deque of float
        Time each update took on the GUI thread, ms (the last 2000).
    last_message : QMessageBox or None
        The last error or notice shown.
    """

    UPDATE_MS = 50
    MAX_KEEP_S = 60.0

    def __init__(self, ctx, parent: QWidget | None = None, *, waterfall_rows: int = 300):
        super().__init__(parent)
        self.ctx = ctx
        self.rows = int(waterfall_rows)
        self.sound_status = sound_card_status()
        self.spectrum: LiveSpectrum | None = None
        self.waterfall: WaterfallBuffer | None = None
        self.ring: SampleRing | None = None
        self.draw_ms: deque[float] = deque(maxlen=2000)
        self.last_message: QMessageBox | None = None
        self._source: LiveSource | None = None
        self._point: str | None = None
        self._run_id: str | None = None
        self._read_pos = 0
        self._lost_blocks = 0
        self._updates: deque[float] = deque(maxlen=200)
        self._frame_times: deque[tuple[float, int]] = deque(maxlen=200)
        self._last_status = 0.0
        self._state = "stopped"
        self._note = ""
        self._kept_from: LiveSource | None = None
        self._rebuild_pending = False
        self._wave_x = np.zeros(0)
        self._wave_y = np.zeros(0)
        self._build_controls()
        self._build_plots()
        self._apply_palette()
        self._timer = QTimer(self)
        self._timer.setInterval(self.UPDATE_MS)
        self._timer.timeout.connect(self.tick)
        ctx.archive_changed.connect(self._refresh_points)
        ctx.prefs_changed.connect(self._prefs_changed)
        self._refresh_points()
        self._schedule_rebuild()
        self._set_state("stopped")

    # -- building ------------------------------------------------------------------------
    def _build_controls(self) -> None:
        self.source_panel = SourcePanel(self.ctx, self.sound_status)
        self.spectrum_panel = SpectrumPanel()
        self.spectrum_panel.restore(self.ctx.prefs)
        self.keep_bar = KeepBar()
        self.start_button = QPushButton("Start")
        self.start_button.setDefault(True)
        self.stop_button = QPushButton("Stop")
        self.reset_button = QPushButton("Reset average")
        self.start_button.clicked.connect(self.toggle)
        self.stop_button.clicked.connect(self.stop_source)
        self.reset_button.clicked.connect(self._reset_average)
        self.keep_bar.button.clicked.connect(self.keep)
        self.keep_bar.point_changed.connect(self._point_changed)
        sp = self.source_panel
        sp.kind_changed.connect(self._source_config_changed)
        sp.simulated.changed.connect(self._machine_changed)
        for page in (sp.simulated, sp.sound_card, sp.replay):
            page.rate_changed.connect(lambda p=page: self._page_changed(p))
        sp.replay.load_failed.connect(lambda text: self._message("Cannot read the recording",
                                                                 text))
        self.spectrum_panel.changed.connect(self._schedule_rebuild)
        kind = self.ctx.prefs.get("live/source", "simulated", str)
        sp.set_kind(kind)

    def _build_plots(self) -> None:
        self.graphics = pg.GraphicsLayoutWidget()
        self.graphics.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)
        layout = self.graphics.ci
        self.wave_plot = layout.addPlot(row=0, col=0)
        self.wave_plot.setLabel("bottom", "time (0 = now)", units="s")
        self.wave_curve = self.wave_plot.plot()
        self.spec_plot = layout.addPlot(row=1, col=0)
        self.spec_plot.setLabel("bottom", "frequency", units="Hz")
        self.spectrum_curve = self.spec_plot.plot()
        for plot, curve in ((self.wave_plot, self.wave_curve),
                            (self.spec_plot, self.spectrum_curve)):
            curve.setDownsampling(auto=True, method="peak")
            curve.setClipToView(True)
            curve.setSkipFiniteCheck(True)
            plot.setMenuEnabled(False)
            plot.setMouseEnabled(x=True, y=False)
            plot.hideButtons()
            plot.getAxis("left").enableAutoSIPrefix(False)
        self.order_line = pg.InfiniteLine(angle=90, movable=False, label="1×",
                                          labelOpts={"position": 0.92})
        self.spec_plot.addItem(self.order_line)
        self.order_line.hide()
        self.waterfall_plot = WaterfallPlot(layout, row=2)
        self.waterfall_plot.plot.setXLink(self.spec_plot)
        self.waterfall_plot.plot.hideButtons()
        for row, stretch in ((0, 2), (1, 3), (2, 4)):
            layout.layout.setRowStretchFactor(row, stretch)
        self._wave_range = _Range(self.wave_plot, symmetric=True)
        self._spec_range = _Range(self.spec_plot, symmetric=False)

        left = QWidget()
        col = QVBoxLayout(left)
        col.addWidget(self.source_panel)
        buttons = QHBoxLayout()
        for b in (self.start_button, self.stop_button, self.reset_button):
            buttons.addWidget(b)
        col.addLayout(buttons)
        col.addWidget(self.spectrum_panel)
        col.addWidget(self.keep_bar)
        col.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidget(left)
        scroll.setWidgetResizable(True)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        # One width for the controls, so that word-wrapped notes are laid out once.
        scroll.setFixedWidth(left.sizeHint().width() + 30)

        self.readout = QLabel("")
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.status = QLabel("")
        right = QVBoxLayout()
        right.addWidget(self.readout)
        right.addWidget(self.graphics, 1)
        right.addWidget(self.status)
        main = QHBoxLayout(self)
        main.addWidget(scroll)
        main.addLayout(right, 1)

    def _apply_palette(self) -> None:
        pal = self.ctx.palette
        fg, grid = pal.ui("foreground"), pal.ui("grid")
        self.graphics.setBackground(pal.ui("background"))
        for plot in (self.wave_plot, self.spec_plot, self.waterfall_plot.plot):
            for name in ("left", "bottom"):
                axis = plot.getAxis(name)
                axis.setPen(pg.mkPen(grid))
                axis.setTextPen(pg.mkPen(fg))
        # A grid on the spectrum's major ticks only: grid lines cost more than anything
        # else in a repaint (tests/benchmarks/bench_live.py).
        self.spec_plot.showGrid(x=True, y=True, alpha=0.3)
        for name in ("left", "bottom"):
            self.spec_plot.getAxis(name).setStyle(maxTickLevel=0)
        self.wave_curve.setPen(pg.mkPen(pal.trace(0), width=1))
        self.spectrum_curve.setPen(pg.mkPen(pal.trace(0), width=1))
        marker = pal.ui("cursor")  # apart from the trace colours in both themes
        self.order_line.setPen(pg.mkPen(marker, width=1, style=Qt.PenStyle.DashLine))
        self.order_line.label.setColor(marker)
        for name in ("left", "right"):
            axis = self.waterfall_plot.bar.getAxis(name)
            axis.setTextPen(pg.mkPen(fg))
            axis.setPen(QPen(grid))
        self.waterfall_plot.label_colour = fg.name()
        for plot in (self.wave_plot, self.spec_plot, self.waterfall_plot.plot):
            for name in ("left", "bottom"):
                axis = plot.getAxis(name)
                axis.setLabel(axis.labelText, units=axis.labelUnits, color=fg.name())

    def _prefs_changed(self) -> None:
        self._apply_palette()
        self._schedule_rebuild()

    # -- public API ----------------------------------------------------------------------
    def show_point(self, point_path: str | None, run_id: str | None) -> None:
        """Make ``point_path`` the point kept to (and whose runs can be replayed);
        ``run_id`` is offered first for replay."""
        self._point = point_path or None
        self._run_id = run_id or None
        self._refresh_points()

    @property
    def source(self) -> LiveSource | None:
        return self._source

    @property
    def is_running(self) -> bool:
        return self._source is not None and self._source.running

    def start(self) -> bool:
        """Start (or resume) the chosen source; False when it could not start."""
        if self._source is not None and not self._source.finished:
            if not self._source.running:
                self._source.resume()
                self._set_state("running")
            return True
        self.stop_source()
        try:
            src = self.source_panel.make_source()
            cap = int(np.ceil(self.MAX_KEEP_S * src.fs_hz))
            if self.ring is None or self.ring.capacity != cap:
                self.ring = SampleRing(cap)
            self.ring.clear()
            self._read_pos = 0
            self._lost_blocks = 0
            self._source = self._kept_from = src
            self._rebuild()
            src.start(self.ring)
        except EngineError as exc:
            self._source = None
            self._message("Cannot start the source", str(exc))
            self._set_state("stopped")
            return False
        self._updates.clear()
        self._frame_times.clear()
        self._timer.start()
        self._set_state("running")
        return True

    def pause(self) -> None:
        """Pause the source; what was already received is still drawn."""
        if self._source is not None and self._source.running:
            self._source.pause()
            self._set_state("paused")

    def toggle(self) -> None:
        if self.is_running:
            self.pause()
        else:
            self.start()

    def stop_source(self) -> None:
        """End the source (the next Start makes a new one); the plots stay."""
        src, self._source = self._source, None
        if src is not None:
            src.stop()
        self._timer.stop()
        self._set_state("stopped")

    def stop(self) -> None:
        """Stop the source and the timer (the window is closing); remember settings."""
        self.stop_source()
        self.spectrum_panel.remember(self.ctx.prefs)
        self.ctx.prefs.set("live/source", self.source_panel.current_kind())

    def keep(self):
        """Store the last seconds of signal as a run of the chosen point (on a job).

        Returns
        -------
        Job or None
            None when there is nothing to keep or no point (the user is told why).
        """
        src, point = self._kept_from, self.keep_bar.current_point()
        if src is None or self.ring is None or self.ring.written == 0:
            self._message("Nothing to keep", "Start a source first: Keep stores the last "
                          "seconds of its signal as a run.")
            return None
        if not point:
            self._message("No point chosen", "Choose the point the run belongs to.")
            return None
        fs = src.fs_hz
        n = min(int(round(self.keep_bar.seconds.value() * fs)), self.ring.written,
                self.ring.capacity)
        samples = self.ring.latest(n).copy()
        taken = datetime.now(UTC) - timedelta(seconds=n / fs)
        rec = Recording(fs_hz=fs, channels=[Channel(samples, src.unit, name="vibration",
                                                    sensitivity_v_per_unit=src.sensitivity_v_per_unit)],
                        source=src.description, rpm=src.rpm, taken=taken)
        notes = f"kept from the live view: {src.description}, {n / fs:.3g} s"

        def work(progress, cancel):
            progress(0, 1, f"storing {n / fs:.3g} s at {point}")
            with self.ctx.writer("shaftwatch-gui: keep live signal") as arc:
                result = arc.import_recording(rec, point, taken=taken, notes=notes,
                                              source=src.description)
                if not result.duplicate:      # analysed and evaluated, as on import
                    process_new_runs(arc, [result.run_id])
            progress(1, 1, "stored")
            return result

        self.keep_bar.button.setEnabled(False)
        self._set_status_note(f"storing {n / fs:.3g} s at {point}…")
        return self.ctx.jobs.run(work, title="Keep live signal", on_done=self._kept,
                                 on_error=self._keep_failed)

    # -- keeping -------------------------------------------------------------------------
    def _kept(self, result) -> None:
        self.keep_bar.button.setEnabled(True)
        what = "was already stored as run" if result.duplicate else "kept as run"
        self._set_status_note(f"{what} {result.run_id[:10]} at {result.point}")
        self.ctx.reload()

    def _keep_failed(self, text: str, details: str) -> None:
        self.keep_bar.button.setEnabled(True)
        self._message("Could not keep the signal", text)

    # -- settings ------------------------------------------------------------------------
    def _schedule_rebuild(self) -> None:
        if not self._rebuild_pending:
            self._rebuild_pending = True
            QTimer.singleShot(0, self._rebuild_if_pending)

    def _rebuild_if_pending(self) -> None:
        if self._rebuild_pending:
            self._rebuild()

    def _rebuild(self) -> None:
        """A new spectrum and waterfall for the current source and settings."""
        self._rebuild_pending = False
        src = self._source
        fs = src.fs_hz if src is not None else self.source_panel.fs_hz()
        unit_in = src.unit if src is not None else self.source_panel.unit()
        if fs is None:
            return
        panel = self.spectrum_panel
        panel.blockSignals(True)
        try:
            panel.set_rate(fs)
            panel.set_units(unit_in, self.ctx.prefs.units)
        finally:
            panel.blockSignals(False)
        try:
            spec = LiveSpectrum(panel.settings(), fs, unit_in, on_frame=self._on_frame)
        except InputError as exc:
            self._message("Spectrum settings", str(exc))
            return
        self.spectrum = spec
        self.waterfall = WaterfallBuffer(self.rows, spec.frequency_hz.size)
        self.waterfall_plot.set_axes(self.waterfall, spec.settings.fmax_hz, spec.resolution_hz,
                                     spec.hop_s, spec.unit_label)
        self.spec_plot.setXRange(0.0, spec.settings.fmax_hz, padding=0.0)
        fg = self.ctx.palette.ui("foreground").name()
        self.spec_plot.setLabel("left", spec.unit_label, color=fg)
        self.wave_plot.setLabel("left", unit(spec.unit_in).label, color=fg)
        span = float(panel.wave_span.currentData())
        n_wave = max(2, int(round(span * fs)))
        self._wave_x = (np.arange(n_wave) - (n_wave - 1)) / fs
        self._wave_y = np.zeros(n_wave)
        self.wave_plot.setXRange(float(self._wave_x[0]), 0.0, padding=0.0)
        self._spec_y = np.zeros(spec.frequency_hz.size)
        self.spectrum_curve.setData(spec.frequency_hz, self._spec_y)
        self._wave_range.reset()
        self._spec_range.reset()
        self._frame_times.clear()
        if self.ring is not None and src is not None:
            self._read_pos = self.ring.written  # the new spectrum starts from now
        self._draw_waterfall()

    def _page_changed(self, page) -> None:
        if page is self.source_panel.page():
            self._source_config_changed()

    def _source_config_changed(self, *_args) -> None:
        """The source kind, its rate, device or recording changed: a new source."""
        was_running = self.is_running
        if self._source is not None:
            self.stop_source()
        self.ctx.prefs.set("live/source", self.source_panel.current_kind())
        self._schedule_rebuild()
        if was_running:
            QTimer.singleShot(0, self.start)

    def _machine_changed(self) -> None:
        if isinstance(self._source, SimulatedSource):
            try:
                self._source.update(self.source_panel.simulated.settings())
            except InputError as exc:
                self._message("Simulated machine", str(exc))

    def _reset_average(self) -> None:
        if self.spectrum is not None:
            self.spectrum.reset()
            self._spec_range.reset()

    def _point_changed(self, path: str) -> None:
        self._point = path or self._point
        rows = []
        if path:
            try:
                rows = self.ctx.archive().runs(path)
            except EngineError:
                rows = []
        self.source_panel.replay.set_runs(rows, self._run_id)

    def _refresh_points(self) -> None:
        try:
            paths = [p.path for p in self.ctx.archive().points()]
            self.keep_bar.setToolTip("")
        except EngineError as exc:
            paths = []
            self.keep_bar.setToolTip(str(exc))
        self.keep_bar.set_points(paths, self._point)

    # -- updating ------------------------------------------------------------------------
    def _on_frame(self, amplitude: np.ndarray) -> None:
        self.waterfall.add(amplitude)

    def tick(self) -> None:
        """Drain the ring, feed the spectrum and redraw what changed (GUI thread)."""
        src, spec, ring = self._source, self.spectrum, self.ring
        if src is None or spec is None or ring is None:
            return
        t0 = time.perf_counter()
        if src.error:
            text = src.error
            self.stop_source()
            self._message("The source stopped", text)
            return
        x, self._read_pos, lost = ring.read_since(self._read_pos, limit=int(src.fs_hz))
        if lost:
            self._lost_blocks += -(-lost // max(1, int(BLOCK_S * src.fs_hz)))
        if x.size:
            frames = spec.feed(x)
            self._draw_waveform()
            if frames:
                self._frame_times.append((t0, frames))
                self._spec_y[:] = spec.amplitude
                self.spectrum_curve.setData(spec.frequency_hz, self._spec_y)
                self._spec_range.fit(float(self._spec_y[1:].max()))
                self._draw_waterfall()
            self._updates.append(t0)
            self.draw_ms.append((time.perf_counter() - t0) * 1e3)
        if src.finished and self._read_pos >= ring.written:
            self._source = None
            self._timer.stop()
            self._set_state("finished")
        if t0 - self._last_status >= 0.5:
            self._update_status(t0)

    def _draw_waveform(self) -> None:
        y = self.ring.latest(self._wave_y.size, out=self._wave_y)
        self.wave_curve.setData(self._wave_x[self._wave_x.size - y.size:], y)
        if y.size:
            self._wave_range.fit(float(np.abs(y).max()))

    def _draw_waterfall(self) -> None:
        if self.waterfall is not None:
            self.waterfall_plot.show(self.waterfall,
                                     float(self.spectrum_panel.colour_span.currentData()))

    # -- status --------------------------------------------------------------------------
    def _rate(self, now: float) -> tuple[float, float]:
        """Updates per second and spectra per second over the last two seconds."""
        ups = [t for t in self._updates if now - t <= 2.0]
        ups_rate = (len(ups) - 1) / (ups[-1] - ups[0]) if len(ups) > 2 else 0.0
        frames = [(t, n) for t, n in self._frame_times if now - t <= 2.0]
        if len(frames) > 2:
            fr_rate = sum(n for _, n in frames[1:]) / (frames[-1][0] - frames[0][0])
        else:
            fr_rate = 0.0
        return ups_rate, fr_rate

    def _update_status(self, now: float | None = None) -> None:
        now = time.perf_counter() if now is None else now
        self._last_status = now
        src, spec = self._source, self.spectrum
        parts = [self._state]
        if src is not None:
            parts.append(f"{src.description} at {src.fs_hz / 1000:g} kHz")
            ups, frs = self._rate(now)
            parts.append(f"{ups:.1f} updates/s")
            parts.append(f"{frs:.1f} spectra/s")
            dropped = (self.ring.dropped_blocks if self.ring else 0) + self._lost_blocks
            parts.append(f"dropped blocks: {dropped}")
        if spec is not None:
            if spec.frames == 0 and src is not None:
                parts.append(f"first spectrum after {spec.frame_s:.3g} s of signal")
            else:
                parts.append(f"{spec.frames} averaged")
            if self.draw_ms:
                parts.append(f"update {np.median(list(self.draw_ms)[-40:]):.1f} ms")
        if self._note:
            parts.append(self._note)
        self.status.setText(" · ".join(parts))
        self._update_readout()

    def _update_readout(self) -> None:
        spec, src = self.spectrum, self._source
        if spec is None or spec.frames == 0:
            self.readout.setText("")
            return
        f, a = spec.peak()
        text = f"Highest line {f:.2f} Hz, {a:.4g} {spec.unit_label}"
        rpm = src.rpm if src is not None else None
        if rpm:
            shaft = rpm / 60.0
            text += f" ({f / shaft:.2f}×) · speed {rpm:.0f} rpm, 1× = {shaft:.2f} Hz"
            self.order_line.setValue(shaft)
            self.order_line.show()
        else:
            self.order_line.hide()
        text += f" · Δf {spec.resolution_hz:.4g} Hz, frame {spec.frame_s:.3g} s"
        self.readout.setText(text)

    def _set_status_note(self, text: str) -> None:
        self._note = text
        self._update_status()

    def _set_state(self, state: str) -> None:
        self._state = state
        self.start_button.setText({"running": "Pause", "paused": "Resume"}.get(state, "Start"))
        self.stop_button.setEnabled(state in ("running", "paused"))
        self._update_status()

    def _message(self, title: str, text: str) -> None:
        """Tell the user (a window-modal box that does not block the live timer)."""
        box = QMessageBox(QMessageBox.Icon.Warning, title, text, QMessageBox.StandardButton.Ok,
                          self)
        box.setWindowModality(Qt.WindowModality.WindowModal)
        box.open()
        self.last_message = box
