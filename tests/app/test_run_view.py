"""The run view on P-102's pump drive-end point of the demo archive: what the waveform,
spectrum and envelope plots show, the settings panel, cursors, markers, alarm bands,
peaks and findings."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import re  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

from app.run_view import RunView  # noqa: E402

P102_DE = "Demo Works/P-102/pump DE H"

# BEARING_B of engine.demo_plant: 9 elements of 17.5 mm on an 80 mm pitch circle, 0°.
# BPFO = n/2 · (1 − d/D · cos α) orders (Harris & Kotzalas, Rolling Bearing Analysis),
# worked by hand: 4.5 · (1 − 17.5/80) = 3.515625.
BPFO_ORDERS = 3.515625


@pytest.fixture
def view(qtbot, app_context):
    v = RunView(app_context, None)
    qtbot.addWidget(v)
    v.resize(1300, 900)
    v.show()
    with qtbot.waitSignal(v.computed, timeout=30000):
        v.show_point(P102_DE, None)
    yield v
    app_context.jobs.stop_all()


def recompute(qtbot, v, **changes):
    """Edit the settings panel's widgets and wait for the new analysis."""
    with qtbot.waitSignal(v.computed, timeout=30000):
        for name, value in changes.items():
            widget = getattr(v.panel, name)
            if hasattr(widget, "setCurrentText") and isinstance(value, str):
                i = widget.findData(value)
                widget.setCurrentIndex(i) if i >= 0 else widget.setCurrentText(value)
            elif hasattr(widget, "setValue"):
                widget.setValue(value)
            else:
                widget.setChecked(value)
        v.panel.flush()


def test_latest_run_with_the_points_settings(view, app_context):
    arc = app_context.archive()
    props = arc.point(P102_DE).props
    assert view.run_id == arc.runs(P102_DE)[-1].run_id
    x, y = view.spec_curve.getData()
    assert x.size == props["lines"] + 1               # lines 0 … Fmax
    assert x[-1] == pytest.approx(props["fmax_hz"])
    assert x[1] - x[0] == pytest.approx(props["fmax_hz"] / props["lines"])
    assert view.panel.lines.currentText() == str(props["lines"])
    assert view.panel.window.currentText() == props["window"]
    assert "1600 lines, Fmax 1000 Hz" in view.spec_plot.getPlotItem().titleLabel.text


def test_waveform_readout_matches_numpy(view, app_context):
    rec, _ = app_context.archive().read_run(view.run_id)
    x = rec.channels[0].samples
    d = x - x.mean()
    rms = float(np.sqrt(np.mean(d * d)))             # numpy as the reference
    peak = float(np.max(np.abs(d)))
    text = view.wave_readout.text()
    shown_rms = float(re.search(r"RMS ([0-9.]+) g", text).group(1))
    shown_peak = float(re.search(r"peak ([0-9.]+) g", text).group(1))
    assert shown_rms == pytest.approx(rms, rel=5e-4)   # four significant digits shown
    assert shown_peak == pytest.approx(peak, rel=5e-4)
    assert view.analysis.stats.rms == pytest.approx(rms, rel=1e-12)
    crest = float(re.search(r"crest factor ([0-9.]+)", text).group(1))
    assert crest == pytest.approx(peak / rms, rel=5e-3)
    wx, wy = view.wave_curve.getOriginalDataset()       # drawn peak-downsampled
    assert wy.size == x.size and wx[-1] == pytest.approx((x.size - 1) / rec.fs_hz)


def test_changing_lines_recomputes(qtbot, view):
    recompute(qtbot, view, lines="800")
    x, _ = view.spec_curve.getData()
    assert x.size == 801
    assert x[1] - x[0] == pytest.approx(1000.0 / 800)    # Δf = Fmax / lines
    assert view.analysis.spectrum.lines == 800


def test_cpm_and_order_axes(qtbot, view):
    hz, amp = view.spec_curve.getData()
    hz, amp = hz.copy(), amp.copy()
    view.panel.x_axis.setCurrentIndex(view.panel.x_axis.findData("CPM"))
    view.panel.flush()
    cpm, amp2 = view.spec_curve.getData()
    np.testing.assert_allclose(cpm, 60.0 * hz)          # cycles per minute = 60 × Hz
    np.testing.assert_array_equal(amp2, amp)
    assert "CPM" in view.spec_plot.getPlotItem().getAxis("bottom").labelText
    view.panel.x_axis.setCurrentIndex(view.panel.x_axis.findData("orders"))
    view.panel.flush()
    orders, _ = view.spec_curve.getData()
    shaft_hz = view.analysis.rpm / 60.0                 # pump shaft, ratio 1
    np.testing.assert_allclose(orders, hz / shaft_hz)


def test_unit_and_scale(qtbot, view):
    rms = view.analysis.spectrum.amplitude.copy()
    recompute(qtbot, view, scale="peak")
    np.testing.assert_allclose(view.analysis.spectrum.amplitude, np.sqrt(2.0) * rms,
                               rtol=1e-9)                # peak = √2 · RMS (sinusoid)
    recompute(qtbot, view, unit="in/s")
    assert view.analysis.spectrum.unit == "in/s"
    np.testing.assert_allclose(view.analysis.spectrum.amplitude,
                               np.sqrt(2.0) * rms / 25.4, rtol=1e-9)  # 1 in = 25.4 mm


def test_bpfo_markers_on_spectrum_and_envelope(view, app_context):
    if not hasattr(app_context.archive(), "machine_model"):
        pytest.skip("Archive.machine_model is not available yet")
    assert app_context.archive().machine_model("Demo Works", "P-102") is not None
    shaft_hz = view.analysis.rpm / 60.0
    for layer in (view.spec_markers, view.env_markers):
        marks = {m.label: m.frequency_hz for m in layer.shown()}
        assert "BPFO" in marks
        assert marks["BPFO"] == pytest.approx(BPFO_ORDERS * shaft_hz, rel=1e-9)
    assert "BPFO" in view.spec_markers.labels()
    view.set_marker_kind("bearing", False)
    assert "BPFO" not in view.spec_markers.labels() and "1×" in view.spec_markers.labels()
    view.markers_action.trigger()                      # M: all markers off
    assert view.spec_markers.labels() == [] and view.env_markers.labels() == []
    view.set_marker_kind("bearing", True)


def test_alarm_bands_follow_speed(view, app_context):
    plan = app_context.archive().plan(P102_DE)
    if plan is None:
        pytest.skip("the demo archive has no alarm plan for this point")
    shaft_hz = view.analysis.rpm / 60.0
    bands = {b.name: b for b in view.spec_bands.bands}
    for b in plan.bands:
        if b.basis == "order" and b.measure == "band_rms":
            shown = bands[b.name]
            # Order bands are converted with the run's speed: edge = order × rpm / 60.
            assert shown.low_hz == pytest.approx(b.low * shaft_hz)
            assert shown.high_hz == pytest.approx(b.high * shaft_hz)
            assert shown.alert == pytest.approx(b.alert) and shown.danger == pytest.approx(b.danger)
    assert "overall velocity" not in bands            # shown in the header instead
    n = len(view.spec_bands.bands)
    view.zoom_to_next_band()
    lo, hi = view.spec_plot.getPlotItem().viewRange()[0]
    first = view.spec_bands.bands[0]
    assert lo <= first.low_hz and hi >= first.high_hz and hi - lo < 100.0
    for _ in range(n):
        view.zoom_to_next_band()                       # after the last: the whole spectrum
    lo, hi = view.spec_plot.getPlotItem().viewRange()[0]
    assert hi == pytest.approx(1000.0)


def test_header_shows_state_and_zone(view, app_context):
    st = app_context.archive().point_states()[P102_DE]
    text = view.header.text()
    assert app_context.palette.state_word(st["state"]) in text
    if st["zone"]:
        assert f"zone {st['zone']}" in text


def test_findings_highlight_their_evidence(view):
    results = view.analysis.results
    if results is None or not results.findings:
        pytest.skip("the demo run has no stored findings")
    titles = view.findings.titles()
    assert titles == [f["title"] for f in results.findings]
    i = next((k for k, f in enumerate(results.findings) if f["kind"] == "bearing"), 0)
    view.findings.select(i)
    evidence = [e for e in results.findings[i]["evidence"] if e["frequency_hz"] is not None]
    shown = sorted(hz for hz, _ in view.spec_highlight.items + view.env_highlight.items)
    assert shown == pytest.approx(sorted(e["frequency_hz"] for e in evidence))
    assert results.findings[i]["recommendation"] in view.findings.detail.text()
    assert len(view.spec_highlight._lines) + len(view.env_highlight._lines) == len(evidence)


def test_peak_table_labels_running_speed(view):
    sources = view.peak_table.sources()
    assert len(sources) == view.peak_table.rowCount() > 0
    top = view.analysis.peaks[0]
    # The largest velocity line of a pump is 1× (engine.demo_plant baseline: 1× largest).
    assert top.peak.order == pytest.approx(1.0, abs=0.01)
    assert "1×" in sources[0]


def test_cursors(qtbot, view):
    f = view.analysis.spectrum.frequency_hz
    view.set_cursor_mode("single")
    view.cursor.place(f[40])
    text = view.cursor_readout.text()
    assert f"{f[40]:.2f} Hz" in text and f"{60 * f[40]:.0f} CPM" in text
    order = f[40] / (view.analysis.rpm / 60.0)
    assert f"{order:.2f}×" in text
    view.set_cursor_mode("harmonic")
    view.cursor.place(100.0)
    lines = view.cursor.positions_hz()
    assert lines == pytest.approx([100.0 * k for k in range(1, 11)])  # 10 × 100 Hz ≤ Fmax
    view.set_cursor_mode("sideband")
    view.cursor.place(200.0, 25.0)
    lines = sorted(view.cursor.positions_hz())
    assert lines == pytest.approx([125.0, 150.0, 175.0, 200.0, 225.0, 250.0, 275.0])
    view.next_cursor_action.trigger()                 # sideband → off
    assert view.cursor.mode == "off" and view.cursor_readout.text() == ""


def test_cache_makes_going_back_immediate(qtbot, view, app_context):
    rows = app_context.archive().runs(P102_DE)
    first = view.run_id
    with qtbot.waitSignal(view.computed, timeout=30000):
        view.show_point(P102_DE, rows[0].run_id)
    n = len(view.cache)
    with qtbot.waitSignal(view.computed, timeout=1000):
        view.show_point(P102_DE, first)               # drawn from the cache at once
    assert view.analysis.run_id == first and len(view.cache) == n
    assert not app_context.jobs.running()


def test_too_many_lines_is_reported_not_raised(qtbot, view, monkeypatch):
    shown = []
    monkeypatch.setattr("app.dialogs.show_error",
                        lambda parent, what, message, **kw: shown.append((what, message, kw)))
    with qtbot.waitSignal(view.failed, timeout=30000):
        view.panel.lines.setCurrentText("25600")
        view.panel.flush()
    what, message, kw = shown[0]
    assert "25600 lines" in message and "fewer lines" in message
    assert kw["advice"].startswith("Choose fewer lines")
    assert view.analysis is None and view.spec_curve.getData()[0] is None  # nothing stale
    with qtbot.waitSignal(view.computed, timeout=30000):   # back to lines that fit
        view.panel.lines.setCurrentText("1600")
        view.panel.flush()
    assert view.analysis.spectrum.lines == 1600


def test_settings_start_from_each_point(qtbot, view, app_context):
    recompute(qtbot, view, lines="800")
    other = "Demo Works/P-101/pump DE H"
    with qtbot.waitSignal(view.computed, timeout=30000):
        view.show_point(other, None)
    assert view.analysis.spectrum.lines == app_context.archive().point(other).props["lines"]
    assert view.settings.lines == 1600


def test_envelope_band_is_the_kurtograms(view, app_context):
    # The band shown (stored when the run was analysed, or chosen now) is the band the
    # fast kurtogram picks for this record and envelope Fmax (Antoni 2007, as
    # implemented by engine.envelope.auto_band), computed here directly.
    from engine.envelope import auto_band

    rec, _ = app_context.archive().read_run(view.run_id)
    band, _ = auto_band(rec.channels[0].samples, rec.fs_hz,
                        fmax_hz=view.settings.env_fmax_hz)
    env = view.analysis.envelope
    assert env.auto and env.band_hz == pytest.approx(band)
    assert "kurtogram" in view.env_plot.getPlotItem().titleLabel.text


def test_point_without_model_plan_or_results(qtbot, qapp, tmp_path, prefs):
    # An archive with one imported run and nothing else: orders from the machine's
    # speed ratios only, no bands, no findings; each said in the view.
    from app.context import AppContext
    from engine import demo_plant
    from engine.archive import create_archive

    path = tmp_path / "small.shaftwatch"
    rec = demo_plant.demo_recording("P-101", "pump DE H", 3)
    with create_archive(path, plant_name="Small Works") as arc:
        arc.add_site("Small Works")
        arc.add_machine("Small Works", "P-1", nominal_rpm=1480.0,
                        ratios={"motor": 1.0, "pump": 1.0})
        arc.add_point("Small Works", "P-1", "pump DE H", direction="H", unit="g",
                      fmax_hz=1000.0, lines=800)
        arc.import_recording(rec, "Small Works/P-1/pump DE H")
    ctx = AppContext(path, prefs=prefs)
    v = RunView(ctx, None)
    qtbot.addWidget(v)
    with qtbot.waitSignal(v.computed, timeout=30000):
        v.show_point("Small Works/P-1/pump DE H", None)
    a = v.analysis
    assert a.spectrum.lines == 800 and not a.setup.model_stored
    labels = v.spec_markers.labels()
    assert "motor 1×" in labels or "1×" in labels
    assert all("BPFO" not in label for label in labels)
    assert v.spec_bands.bands == [] and v.findings.titles() == []
    assert "no machine model stored" in v.notes.text()
    assert "not been analysed" in v.findings.detail.text()
    ctx.close()


def test_full_band_fmax(qtbot, view):
    # Fmax 0 in the panel means fs/2.56 (engine.spectrum: no resampling); the demo runs
    # are sampled at 25.6 kHz, so Fmax = 25600 / 2.56 = 10 kHz (common practice: 2.56).
    recompute(qtbot, view, fmax=0.0)
    assert view.settings.fmax_hz is None
    assert view.analysis.spectrum.fmax_hz == pytest.approx(view.analysis.fs_hz / 2.56)
    assert view.panel.fmax.text() == "full band (fs/2.56)"
