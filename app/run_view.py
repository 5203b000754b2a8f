"""The run view: one run's waveform (with its RMS, peak and crest factor), spectrum and
envelope spectrum, with cursors, source markers, alarm bands, the peak table and the
findings.

Computation runs in a job (``AppContext.jobs``) and is cached per (run, settings), so
the window never freezes and going back to a run is immediate.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import UTC, datetime

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction, QActionGroup, QKeySequence
from PySide6.QtWidgets import (
    QHBoxLayout,
    QLabel,
    QSplitter,
    QTabWidget,
    QToolBar,
    QVBoxLayout,
    QWidget,
)

from engine.units import scale_factor
from engine.units import unit as lookup_unit

from . import dialogs
from .context import AppContext
from .cursors import MODES, CursorTool
from .plots import Band, BandLayer, HighlightLayer, MarkerLayer, XAxis, make_plot, set_title, \
    style_plot
from .run_compute import (ENVELOPE_MEASURES, MARKER_KINDS, SPECTRUM_MEASURES, AnalysisCache,
                          RunAnalysis, analyse_run, band_rows, point_setup)
from .run_markers import DEFAULT_MARKER_KINDS, envelope_markers, source_markers
from .run_panels import FindingsPanel, PeakTable, evidence_marks
from .run_settings import RunSettings, SettingsPanel, remember, remembered, unit_for_system

SCALE_WORDS = {"rms": "RMS", "peak": "peak", "pp": "pk-pk"}


class RunView(QWidget):
    """Waveform, spectrum and envelope spectrum of one run.

    Parameters
    ----------
    ctx : AppContext
    parent : QWidget, optional

    Signals
    -------
    computed(object)
        A :class:`~app.run_compute.RunAnalysis` was drawn.
    failed(str)
        Reading or analysing a run failed (the message shown to the user).
    message(str)
        A line for the status bar.
    """

    computed = Signal(object)
    failed = Signal(str)
    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.point: str | None = None
        self.run_id: str | None = None
        self.analysis: RunAnalysis | None = None
        self.cache = AnalysisCache(size=40)
        self._setups: dict = {}
        self._job = None
        self._wanted: tuple | None = None
        self._zoom_index = -1
        pal = ctx.palette
        self.settings = remembered(ctx.prefs)

        self.header = QLabel("Pick a point in the asset tree.", self)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.header.setWordWrap(True)
        self.wave_readout = QLabel("", self)
        self.wave_readout.setToolTip("Statistics of the whole waveform, mean removed")
        self.cursor_readout = QLabel("", self)
        self.cursor_readout.setWordWrap(True)
        self.notes = QLabel("", self)
        self.notes.setWordWrap(True)

        self.wave_plot = make_plot(pal, title="Waveform", x_label="Time (s)", y_label="",
                                   tooltip="The recorded waveform; drag to pan, wheel to zoom")
        self.spec_plot = make_plot(pal, title="Spectrum", x_label="Frequency (Hz)", y_label="",
                                   tooltip="Spectrum with source markers and alarm bands")
        self.env_plot = make_plot(pal, title="Envelope spectrum", x_label="Frequency (Hz)",
                                  y_label="g peak",
                                  tooltip="Envelope (demodulated) spectrum: bearing defect "
                                          "lines show here first")
        self.wave_curve = self.wave_plot.plot([], [])
        self.wave_curve.setDownsampling(auto=True, method="peak")
        self.wave_curve.setClipToView(True)
        self.spec_curve = self.spec_plot.plot([], [])
        self.env_curve = self.env_plot.plot([], [])
        self.spec_markers = MarkerLayer(self.spec_plot, pal)
        self.env_markers = MarkerLayer(self.env_plot, pal)
        self.spec_bands = BandLayer(self.spec_plot, pal)
        self.env_bands = BandLayer(self.env_plot, pal)
        self.spec_highlight = HighlightLayer(self.spec_plot, pal)
        self.env_highlight = HighlightLayer(self.env_plot, pal)
        self.cursor = CursorTool(self.spec_plot, pal, self.cursor_readout.setText,
                                 describe=self._source_near)
        kinds = ctx.prefs.get("markers/kinds", ",".join(DEFAULT_MARKER_KINDS), str)
        self.marker_kinds = {k for k in str(kinds).split(",") if k in MARKER_KINDS}
        for layer in (self.spec_markers, self.env_markers):
            layer.kinds_on = set(self.marker_kinds)

        self.panel = SettingsPanel(self.settings, self)
        self.peak_table = PeakTable(self)
        self.findings = FindingsPanel(pal, self)
        self.side = QTabWidget(self)
        self.side.addTab(self.panel, "Settings")
        self.side.addTab(self.peak_table, "Peaks")
        self.side.addTab(self.findings, "Findings")

        self.toolbar = QToolBar("Run tools", self)
        self._build_actions()

        plots = QSplitter(Qt.Orientation.Vertical, self)
        wave_box = QWidget(self)
        wl = QVBoxLayout(wave_box)
        wl.setContentsMargins(0, 0, 0, 0)
        wl.addWidget(self.wave_plot, 1)
        wl.addWidget(self.wave_readout)
        spec_box = QWidget(self)
        sl = QVBoxLayout(spec_box)
        sl.setContentsMargins(0, 0, 0, 0)
        sl.addWidget(self.spec_plot, 1)
        sl.addWidget(self.cursor_readout)
        for w in (wave_box, spec_box, self.env_plot):
            plots.addWidget(w)
        plots.setSizes([200, 340, 240])
        split = QSplitter(Qt.Orientation.Horizontal, self)
        split.addWidget(plots)
        split.addWidget(self.side)
        split.setStretchFactor(0, 1)
        self.side.setMinimumWidth(330)
        split.setSizes([900, 360])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        top = QHBoxLayout()
        top.addWidget(self.header, 1)
        lay.addLayout(top)
        lay.addWidget(self.toolbar)
        lay.addWidget(split, 1)
        lay.addWidget(self.notes)

        self.panel.changed.connect(self._settings_changed)
        self.peak_table.peak_chosen.connect(self._peak_chosen)
        self.findings.finding_chosen.connect(self._finding_chosen)
        ctx.archive_changed.connect(self._archive_changed)
        ctx.prefs_changed.connect(self._prefs_changed)

    # -- actions ------------------------------------------------------------------------
    def _action(self, text: str, tip: str, *, shortcut: str | None = None,
                checkable: bool = False, checked: bool = False) -> QAction:
        a = QAction(text, self)
        a.setToolTip(f"{tip} ({shortcut})" if shortcut else tip)
        a.setStatusTip(tip)
        if shortcut:
            a.setShortcut(QKeySequence(shortcut))
            a.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
        a.setCheckable(checkable)
        if checkable:
            a.setChecked(checked)
        self.addAction(a)
        return a

    def _build_actions(self) -> None:
        tb = self.toolbar
        tb.addWidget(QLabel(" Cursor: "))
        self.cursor_group = QActionGroup(self)
        self.cursor_actions: dict[str, QAction] = {}
        tips = {"off": "No cursor", "single": "Single cursor: frequency, amplitude, order",
                "harmonic": "Harmonic cursor: lines at the harmonics of a fundamental",
                "sideband": "Sideband cursor: a centre and a spacing"}
        for mode in MODES:
            a = self._action(mode.capitalize(), tips[mode], checkable=True,
                             checked=mode == "off")
            a.triggered.connect(lambda _=False, m=mode: self.set_cursor_mode(m))
            self.cursor_group.addAction(a)
            tb.addAction(a)
            self.cursor_actions[mode] = a
        self.next_cursor_action = self._action("Next cursor kind", "Switch to the next kind "
                                               "of cursor", shortcut="C")
        self.next_cursor_action.triggered.connect(self._next_cursor)
        tb.addSeparator()
        self.markers_action = self._action("Markers", "Show or hide the source markers",
                                           shortcut="M", checkable=True, checked=True)
        self.markers_action.toggled.connect(self.set_markers_visible)
        tb.addAction(self.markers_action)
        self.kind_actions: dict[str, QAction] = {}
        for kind, label in MARKER_KINDS.items():
            a = self._action(label, f"Markers of {label.lower()}", checkable=True,
                             checked=kind in self.marker_kinds)
            a.toggled.connect(lambda on, k=kind: self.set_marker_kind(k, on))
            tb.addAction(a)
            self.kind_actions[kind] = a
        tb.addSeparator()
        self.bands_action = self._action("Bands", "Shade the point's alarm bands",
                                         checkable=True, checked=True)
        self.bands_action.toggled.connect(self._bands_toggled)
        tb.addAction(self.bands_action)
        self.zoom_action = self._action("Zoom to band", "Zoom the spectrum to the next alarm "
                                        "band (after the last: the whole spectrum)",
                                        shortcut="Z")
        self.zoom_action.triggered.connect(self.zoom_to_next_band)
        tb.addAction(self.zoom_action)
        self.full_action = self._action("Full range", "Show the whole spectrum",
                                        shortcut="Shift+Z")
        self.full_action.triggered.connect(self.full_range)
        tb.addAction(self.full_action)

    def menu_actions(self) -> list[QAction]:
        """The actions the main window lists in its menu for this view."""
        return [self.markers_action, self.zoom_action, self.full_action,
                self.next_cursor_action, self.bands_action]

    # -- public -------------------------------------------------------------------------
    def show_point(self, point_path: str | None, run_id: str | None) -> None:
        """Show ``run_id`` of ``point_path`` (its latest run when ``run_id`` is None)."""
        if not point_path:
            self.point = self.run_id = None
            self._clear("Pick a point in the asset tree.")
            return
        arc = self.ctx.archive()
        if run_id is None:
            rows = arc.runs(point_path)
            run_id = rows[-1].run_id if rows else None
        if point_path != self.point:
            props = arc.point(point_path).props
            self.settings = self.settings.with_point(props)
            self.panel.set_settings(self.settings)
            self._zoom_index = -1
        self.point, self.run_id = point_path, run_id
        if run_id is None:
            self._clear(f"<b>{point_path}</b> has no runs yet.")
            return
        self._request()

    def set_cursor_mode(self, mode: str) -> None:
        self.cursor.set_mode(mode)
        self.cursor_actions[mode].setChecked(True)

    def set_markers_visible(self, on: bool) -> None:
        for layer in (self.spec_markers, self.env_markers):
            layer.set_visible(on)
        if self.markers_action.isChecked() != on:
            self.markers_action.setChecked(on)

    def set_marker_kind(self, kind: str, on: bool) -> None:
        (self.marker_kinds.add if on else self.marker_kinds.discard)(kind)
        self.ctx.prefs.set("markers/kinds", ",".join(sorted(self.marker_kinds)))
        for layer in (self.spec_markers, self.env_markers):
            layer.set_kinds(self.marker_kinds)

    def zoom_to_next_band(self) -> None:
        bands = self.spec_bands.bands
        if not bands:
            self.message.emit("This point's alarm plan has no bands to zoom to.")
            return
        self._zoom_index += 1
        if self._zoom_index >= len(bands):
            self._zoom_index = -1
            self.full_range()
            return
        b = bands[self._zoom_index]
        axis = self._axis()
        lo, hi = axis.to_x(b.low_hz), axis.to_x(b.high_hz)
        margin = max(hi - lo, 1e-9) * 1.5
        x0, x1 = max(lo - margin, 0.0), hi + margin
        self.spec_plot.setXRange(x0, x1, padding=0)
        # Show the band's alert and danger lines with the lines inside the zoom.
        x, y = self.spec_curve.getData()
        inside = y[(x >= x0) & (x <= x1)] if x is not None else np.zeros(0)
        levels = [v for v in (b.alert, b.danger) if v]
        if self.settings.log_y:
            levels = [float(np.log10(v)) for v in levels]
            inside = np.log10(inside[inside > 0]) if inside.size else inside
        top = max([float(inside.max()) if inside.size else 0.0] + levels)
        bottom = 0.0 if not self.settings.log_y else \
            (float(inside.min()) if inside.size else top - 3.0)
        self.spec_plot.setYRange(bottom, top, padding=0.08)
        self.message.emit(f"Band {b.name}: {b.low_hz:.1f}–{b.high_hz:.1f} Hz")

    def full_range(self) -> None:
        if self.analysis is None:
            return
        axis = self._axis()
        self.spec_plot.setXRange(0.0, axis.to_x(self.analysis.spectrum.fmax_hz), padding=0)
        self.spec_plot.enableAutoRange(axis="y")

    # -- computing ----------------------------------------------------------------------
    def _setup(self, point: str):
        if point not in self._setups:
            self._setups[point] = point_setup(self.ctx.archive(), point)
        return self._setups[point]

    def _request(self) -> None:
        settings = self.settings
        key = (self.run_id, settings.compute_key())
        self._wanted = key
        cached = self.cache.get(key)
        if cached is not None:
            cached.settings = settings
            self._show(cached)
            return
        if self._job is not None and not self._job.done:
            self._job.cancel()
        arc = self.ctx.archive()
        point, run_id = self.point, self.run_id
        try:
            setup = self._setup(point)
        except Exception as exc:  # noqa: BLE001 - shown to the user, details logged
            self._failed(str(exc), repr(exc))
            return
        self.header.setText(f"<b>{point}</b> — computing…")

        def work(progress, cancel):
            return analyse_run(arc, point, run_id, settings, progress=progress, cancel=cancel,
                               setup=setup)

        self._job = self.ctx.jobs.run(work, title="Analyse run", on_done=self._done,
                                      on_error=lambda message, details, key=key:
                                      self._failed(message, details, key))

    def _done(self, analysis: RunAnalysis) -> None:
        self.cache.put(analysis)
        if analysis.key != self._wanted:
            return                                  # the user has moved on
        analysis.settings = self.settings
        self._show(analysis)

    def _failed(self, message: str, details: str, key: tuple | None = None) -> None:
        if key is not None and key != self._wanted:
            return                                  # a run the user has left already
        run = self.run_id
        self._clear(f"<b>{self.point}</b> — the run could not be shown.")
        path = ""
        if run and self.point:
            try:
                rows = [r for r in self.ctx.archive().runs(self.point) if r.run_id == run]
                path = str(self.ctx.archive_path / rows[0].path) if rows else ""
            except Exception:  # noqa: BLE001 - the message names the file anyway
                path = ""
        dialogs.show_error(self.window(), "The run could not be shown", message, path=path,
                           advice=dialogs.advice_for(message), details=details)
        self.failed.emit(message)

    def _settings_changed(self, settings: RunSettings) -> None:
        old = self.settings
        self.settings = settings
        remember(self.ctx.prefs, settings)
        if self.run_id is None:
            return
        if self.analysis is not None and old.compute_key() == settings.compute_key():
            self.analysis.settings = settings
            self._show(self.analysis)           # only the display changed
        else:
            self._request()

    def _archive_changed(self) -> None:
        self._setups.clear()
        self.cache.clear()
        if self.point:
            try:
                self.ctx.archive().point(self.point)
            except Exception:  # noqa: BLE001 - the point went away with the archive
                self.point = self.run_id = None
                self._clear("Pick a point in the asset tree.")
                return
            self.show_point(self.point, self.run_id)

    def _prefs_changed(self) -> None:
        pal = self.ctx.palette
        for plot in (self.wave_plot, self.spec_plot, self.env_plot):
            style_plot(plot, pal)
        for layer in (self.spec_markers, self.env_markers, self.spec_bands, self.env_bands,
                      self.spec_highlight, self.env_highlight, self.cursor):
            layer.palette = pal
        self.findings.palette = pal
        new_unit = unit_for_system(self.settings.unit, self.ctx.prefs.units)
        if new_unit != self.settings.unit:
            self.settings = replace(self.settings, unit=new_unit)
            self.panel.set_settings(self.settings)
            if self.run_id:
                self._request()
                return
        if self.analysis is not None:
            self._show(self.analysis)

    # -- drawing ------------------------------------------------------------------------
    def _axis(self) -> XAxis:
        shaft_hz = self.analysis.shaft_hz if self.analysis is not None else None
        return XAxis(self.settings.x_axis, shaft_hz)

    def _clear(self, text: str) -> None:
        self.analysis = None
        self.header.setText(text)
        for curve in (self.wave_curve, self.spec_curve, self.env_curve):
            curve.setData([], [])
        for layer in (self.spec_markers, self.env_markers):
            layer.set_markers([])
        for layer in (self.spec_bands, self.env_bands):
            layer.set_bands([])
        for layer in (self.spec_highlight, self.env_highlight):
            layer.set_items([])
        self.cursor.set_data(np.zeros(0), np.zeros(0), "")
        self.peak_table.set_peaks([], XAxis(), "")
        self.findings.set_findings([])
        self.wave_readout.setText("")
        self.notes.setText("")

    def _header_text(self, a: RunAnalysis) -> str:
        taken = datetime.fromtimestamp(a.taken_s, tz=UTC).strftime("%Y-%m-%d %H:%M UTC")
        parts = [f"<b>{a.point}</b>", taken]
        if a.rpm:
            parts.append(f"{a.rpm:.0f} rpm")
        if a.shaft_hz and a.setup.shaft:
            parts.append(f"{a.setup.shaft} shaft {60 * a.shaft_hz:.0f} rpm")
        r = a.results
        if r is not None:
            pal = self.ctx.palette
            colour = pal.state(r.state).name()
            state = (f"<span style='color:{colour}'>●</span> {pal.state_word(r.state)}")
            if r.zone:
                state += f", ISO 20816 zone {r.zone}"
            parts.append(state)
            overall = r.values.get("overall_velocity_mm_s")
            if overall is not None and overall == overall:
                if self.ctx.prefs.units == "US":
                    parts.append(f"overall {overall * scale_factor('mm/s', 'in/s'):.3f} "
                                 "in/s RMS")
                else:
                    parts.append(f"overall {overall:.2f} mm/s RMS")
        return " — ".join(parts)

    def _show(self, a: RunAnalysis) -> None:
        self.analysis = a
        s = self.settings
        axis = self._axis()
        pal = self.ctx.palette
        pen = pg.mkPen(pal.trace(0), width=1)
        self.header.setText(self._header_text(a))
        wu = lookup_unit(a.waveform_unit).label
        self.wave_curve.setData(a.time_s, a.waveform, pen=pen)
        self.wave_plot.getPlotItem().setLabel("left", wu)
        st = a.stats
        self.wave_readout.setText(f"RMS {st.rms:.4g} {wu} · peak {st.peak:.4g} {wu} · "
                                  f"pk-pk {st.peak_to_peak:.4g} {wu} · crest factor "
                                  f"{st.crest_factor:.3g} · kurtosis {st.kurtosis:.3g}")
        self.wave_plot.getPlotItem().enableAutoRange()

        spec = a.spectrum
        y_label = f"{lookup_unit(spec.unit).label} {SCALE_WORDS.get(spec.scale, spec.scale)}"
        self._draw_spectrum(self.spec_plot, self.spec_curve, spec.frequency_hz, spec.amplitude,
                            axis, s.log_y, pen)
        self.spec_plot.getPlotItem().setLabel("left", y_label)
        set_title(self.spec_plot, f"Spectrum — {spec.lines} lines, Fmax {spec.fmax_hz:g} Hz, "
                                  f"{spec.window}, {spec.averages} "
                                  f"average{'s' if spec.averages != 1 else ''}, "
                                  f"Δf {spec.resolution_hz:.3g} Hz")
        env = a.envelope
        if env is not None:
            es = env.spectrum
            self._draw_spectrum(self.env_plot, self.env_curve, es.frequency_hz, es.amplitude,
                                axis, s.log_y, pg.mkPen(pal.trace(1), width=1))
            how = "kurtogram" if env.auto else "by hand"
            set_title(self.env_plot, f"Envelope spectrum — band {env.band_hz[0]:.0f}–"
                                     f"{env.band_hz[1]:.0f} Hz ({how}), {es.lines} lines")
            self.panel.show_band(env.band_hz)
        else:
            self.env_curve.setData([], [])
            set_title(self.env_plot, "Envelope spectrum — not available")
        for plot in (self.spec_plot, self.env_plot):
            plot.getPlotItem().setLabel("bottom", axis.label())

        spec_marks = source_markers(a, axis)
        self.spec_markers.markers = spec_marks
        self.env_markers.markers = envelope_markers(spec_marks, env.spectrum.fmax_hz) \
            if env is not None else []
        for layer in (self.spec_markers, self.env_markers):
            layer.kinds_on = set(self.marker_kinds)
            layer.visible = self.markers_action.isChecked()
            layer.set_axis(axis)

        states = {b["band"]: b for b in (a.results.bands if a.results is not None else [])}
        plan = a.setup.plan
        spec_b = band_rows(plan, a.shaft_rpm, measures=SPECTRUM_MEASURES, unit_to=spec.unit,
                           scale_to=spec.scale, states=states)
        self.spec_bands.bands = [Band(r["name"], r["low_hz"], r["high_hz"], r["alert"],
                                      r["danger"], r["tooltip"], r["state"]) for r in spec_b]
        env_b = band_rows(plan, a.shaft_rpm, measures=ENVELOPE_MEASURES, unit_to="g",
                          scale_to=env.spectrum.scale if env is not None else "peak",
                          states=states) if env is not None else []
        self.env_bands.bands = [Band(r["name"], r["low_hz"], r["high_hz"], r["alert"],
                                     r["danger"], r["tooltip"], r["state"]) for r in env_b]
        for layer in (self.spec_bands, self.env_bands):
            layer.visible = self.bands_action.isChecked()
            layer.set_axis(axis, log_y=s.log_y)

        for layer in (self.spec_highlight, self.env_highlight):
            layer.set_axis(axis)
        self.cursor.set_data(spec.frequency_hz, spec.amplitude, y_label)
        self.cursor.set_axis(axis)
        self.peak_table.set_peaks(a.peaks, axis, y_label)
        findings = a.results.findings if a.results is not None else []
        note = "" if a.results is not None else \
            "This run has not been analysed in the archive yet; no findings."
        self.findings.set_findings(findings, note=note)
        self.spec_highlight.set_items([])
        self.env_highlight.set_items([])
        extra = []
        if not a.setup.model_stored:
            extra.append("no machine model stored: markers show shaft orders only")
        if a.rpm is None:
            extra.append("the run has no speed: no orders or source markers")
        self.notes.setText("; ".join(a.notes + extra))
        self.computed.emit(a)

    def _draw_spectrum(self, plot: pg.PlotWidget, curve, f_hz: np.ndarray, amp: np.ndarray,
                       axis: XAxis, log_y: bool, pen) -> None:
        y = np.asarray(amp, dtype=float)
        if log_y:
            # Lines that are exactly zero (the DC line, lines below the integration's
            # low cut) would pull a log axis down to nothing: floor them just under
            # the spectrum's own noise floor.
            positive = y[y > 0]
            floor = float(np.percentile(positive, 1)) / 3.0 if positive.size else 1e-12
            y = np.maximum(y, floor)
        plot.getPlotItem().setLogMode(False, log_y)
        curve.setData(axis.to_x(f_hz), y, pen=pen)
        plot.setXRange(0.0, axis.to_x(float(f_hz[-1])) if f_hz.size else 1.0, padding=0)
        plot.enableAutoRange(axis="y")

    # -- panels -------------------------------------------------------------------------
    def _peak_chosen(self, hz: float) -> None:
        if self.cursor.mode == "off":
            self.set_cursor_mode("single")
        self.cursor.place(hz)

    def _finding_chosen(self, finding: dict | None) -> None:
        spec, env = evidence_marks(finding) if finding else ([], [])
        if self.analysis is not None and self.analysis.envelope is None:
            spec, env = spec + env, []
        self.spec_highlight.set_items(spec)
        self.env_highlight.set_items(env)

    def _source_near(self, hz: float) -> str:
        """The marked source nearest a cursor (within 1 % or two lines), for its readout."""
        if self.analysis is None:
            return ""
        tol = max(0.01 * hz, 2.0 * self.analysis.spectrum.resolution_hz)
        m = self.spec_markers.nearest(hz, tol)
        return "" if m is None else f"near {m.tooltip.split(':')[0] or m.label}"

    def _bands_toggled(self, on: bool) -> None:
        for layer in (self.spec_bands, self.env_bands):
            layer.set_visible(on)

    def _next_cursor(self) -> None:
        i = (MODES.index(self.cursor.mode) + 1) % len(MODES)
        self.set_cursor_mode(MODES[i])
