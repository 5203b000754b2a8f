"""The live view: simulated machine, replayed WAV, sound card (present, missing), keep."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import importlib.abc  # noqa: E402
import re  # noqa: E402
import sys  # noqa: E402
import threading  # noqa: E402
import time  # noqa: E402
import types  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402

from app.context import AppContext  # noqa: E402
from app.live_sources import ReplaySource, SampleRing  # noqa: E402
from app.live_soundcard import sound_card_status  # noqa: E402
from app.live_spectrum import LiveSettings, LiveSpectrum, StreamDecimator  # noqa: E402
from app.live_view import LiveView  # noqa: E402
from engine.archive import create_archive  # noqa: E402
from engine.io import read_recording, write_wav  # noqa: E402
from engine.recording import Channel, Recording  # noqa: E402
from engine.simulate import MachineSignal, synthesize  # noqa: E402
from engine.spectrum import SpectrumSettings, compute_spectrum  # noqa: E402

SITE, MACHINE = "Test Works", "P-1"
POINT_H, POINT_V = f"{SITE}/{MACHINE}/pump DE H", f"{SITE}/{MACHINE}/pump DE V"


@pytest.fixture
def ctx(tmp_path, qapp, prefs):
    """A small archive of one machine with two points (the demo archive is not needed);
    ``prefs`` (tests/app/conftest.py) keeps settings in a temporary file."""
    path = tmp_path / "test.shaftwatch"
    with create_archive(path, plant_name=SITE) as arc:
        arc.add_site(SITE)
        arc.add_machine(SITE, MACHINE, nominal_rpm=1480)
        arc.add_point(SITE, MACHINE, "pump DE H", direction="H")
        arc.add_point(SITE, MACHINE, "pump DE V", direction="V")
    c = AppContext(path, prefs=prefs)
    yield c
    c.close()


@pytest.fixture
def view(ctx, qtbot):
    v = LiveView(ctx)
    qtbot.addWidget(v)
    v.resize(1200, 800)
    v.show()
    qtbot.waitUntil(lambda: v.spectrum is not None)
    yield v
    v.stop()


def choose(combo, data) -> None:
    i = combo.findData(data)
    assert i >= 0, f"{data!r} is not offered"
    combo.setCurrentIndex(i)


def shown_spectrum(v: LiveView) -> tuple[np.ndarray, np.ndarray]:
    x, y = v.spectrum_curve.getOriginalDataset()
    return np.asarray(x), np.asarray(y)


def sine_spectrum_peak(x, y):
    i = 1 + int(np.argmax(y[1:]))
    return x[i], y[i]


# -- pieces without a screen --------------------------------------------------------------
def test_ring_keeps_the_latest_samples_and_counts_what_was_lost():
    ring = SampleRing(10)
    ring.write(np.arange(7.0))
    got, nxt, lost = ring.read_since(0)
    assert got.tolist() == list(range(7)) and nxt == 7 and lost == 0
    ring.write(np.arange(7.0, 20.0))  # wraps: only 10 … 19 are left
    got, nxt, lost = ring.read_since(nxt)
    assert got.tolist() == list(range(10, 20)) and nxt == 20 and lost == 3
    assert ring.latest(4).tolist() == [16, 17, 18, 19]
    assert ring.latest(50).tolist() == list(range(10, 20))


@pytest.mark.parametrize("window", ["hann", "flat-top", "rectangular", "blackman-harris"])
@pytest.mark.parametrize("scale", ["peak", "rms", "pp"])
def test_one_frame_equals_compute_spectrum(rng, window, scale):
    # Reference: engine.spectrum.compute_spectrum on the same frame.
    fs, lines = 25600.0, 400
    n = int(2.56 * lines)
    x = 0.3 * np.sin(2 * np.pi * 1000.0 * np.arange(n) / fs) + 0.1 * rng.standard_normal(n) + 0.2
    live = LiveSpectrum(LiveSettings(lines=lines, window=window, scale=scale,
                                     averaging="linear", averages=1), fs, "g")
    assert live.feed(x) == 1
    ref = compute_spectrum(x, fs, settings=SpectrumSettings(lines=lines, window=window,
                                                            scale=scale, averages=1))
    np.testing.assert_allclose(live.frequency_hz, ref.frequency_hz, rtol=1e-12)
    np.testing.assert_allclose(live.amplitude, ref.amplitude, rtol=1e-9,
                               atol=1e-12 * ref.amplitude.max())


def test_velocity_unit_equals_compute_spectrum_converted(rng):
    # Reference: compute_spectrum(unit_out="mm/s"), integration per line (engine.units).
    fs, lines = 25600.0, 800
    x = rng.standard_normal(4 * int(2.56 * lines))
    live = LiveSpectrum(LiveSettings(lines=lines, unit="mm/s", averaging="linear",
                                     averages=100, overlap=0.5), fs, "g")
    live.feed(x)
    ref = compute_spectrum(x, fs, unit_out="mm/s",
                           settings=SpectrumSettings(lines=lines, overlap=0.5, scale="peak"))
    assert live.frames == ref.averages
    np.testing.assert_allclose(live.amplitude, ref.amplitude, rtol=1e-9,
                               atol=1e-12 * ref.amplitude.max())


def test_decimated_spectrum_reads_a_sine_at_its_amplitude(rng):
    # First principles: a sine of amplitude A on a line reads A peak; the anti-alias
    # filter's passband ripple (100 dB Kaiser design, Kaiser 1974) is far below 0.1 %.
    fs, fmax, lines, a = 25600.0, 1000.0, 400, 0.7
    t = np.arange(int(3 * fs)) / fs
    x = a * np.sin(2 * np.pi * 250.0 * t) + 0.01 * rng.standard_normal(t.size)
    live = LiveSpectrum(LiveSettings(fmax_hz=fmax, lines=lines, averaging="linear",
                                     averages=1000, overlap=0.5), fs, "g")
    for i in range(0, t.size, 1234):  # blocks of any size
        live.feed(x[i:i + 1234])
    f, amp = live.peak()
    assert f == pytest.approx(250.0)
    assert amp == pytest.approx(a, rel=1e-3)
    # The engine's resampled spectrum of the same record agrees (different filters,
    # both flat to ~1e-5 in the passband).
    ref = compute_spectrum(x, fs, settings=SpectrumSettings(fmax_hz=fmax, lines=lines,
                                                            overlap=0.5, scale="peak"))
    assert amp == pytest.approx(float(ref.amplitude.max()), rel=1e-3)


def test_decimator_gives_the_same_output_for_any_block_sizes(rng):
    x = rng.standard_normal(30000)
    whole = StreamDecimator(25600.0, 5, 2000.0).process(x)
    d = StreamDecimator(25600.0, 5, 2000.0)
    parts = np.concatenate([d.process(x[i:i + s]) for i, s in
                            zip(np.cumsum([0, 1, 7, 500, 3, 9000]), [1, 7, 500, 3, 9000, 30000])])
    assert parts.size == whole.size
    np.testing.assert_allclose(parts, whole, rtol=0, atol=1e-14)  # rounding of the dot products


def test_replay_source_rejects_a_tachometer_channel():
    rec = Recording(fs_hz=1000.0, channels=[Channel(np.zeros(100), "g"),
                                            Channel(np.zeros(100), "V")],
                    source="run.wav", tach_channel=1)
    with pytest.raises(ValueError, match="run.wav: channel 1 is the tachometer"):
        ReplaySource(rec, 1)


# -- the view --------------------------------------------------------------------------
def test_simulated_machine_shows_1x_at_its_amplitude_and_the_waterfall_grows(view, qtbot):
    sim = view.source_panel.simulated
    sim.set_value("rpm", 1480)
    sim.set_value("imbalance", 0.5)
    sim.set_value("noise", 0.01)
    choose(view.spectrum_panel.window, "flat-top")
    qtbot.wait(20)
    assert view.start()
    qtbot.wait(2000)
    assert view.waterfall.rows_added >= 15
    x, y = shown_spectrum(view)
    f, amp = sine_spectrum_peak(x, y)
    res = view.spectrum.resolution_hz
    # The 1× of a shaft at 1480 rpm is 1480/60 Hz (first principles), within one line.
    assert abs(f - 1480.0 / 60.0) <= res
    # A sine of amplitude A reads A peak; the flat-top window (Heinzel 2002, HFT95:
    # flatness 0.0044 dB) keeps that true between lines.
    assert amp == pytest.approx(0.5, rel=0.02)
    status = view.status.text()
    ups = float(re.search(r"([\d.]+) updates/s", status).group(1))
    assert ups >= 10.0
    assert re.search(r"dropped blocks: \d+", status)
    assert "1480 rpm" in view.readout.text()


def test_pause_stops_the_waterfall_and_resume_restarts_it(view, qtbot):
    assert view.start()
    qtbot.waitUntil(lambda: view.waterfall.rows_added >= 3, timeout=3000)
    view.pause()
    assert "paused" in view.status.text() and view.start_button.text() == "Resume"
    qtbot.wait(300)  # what was already received is drawn
    rows = view.waterfall.rows_added
    qtbot.wait(800)
    assert view.waterfall.rows_added == rows
    view.toggle()
    qtbot.waitUntil(lambda: view.waterfall.rows_added > rows + 2, timeout=3000)


def test_keep_stores_one_run_at_the_chosen_point(view, ctx, qtbot):
    view.show_point(POINT_V, None)
    assert view.keep_bar.current_point() == POINT_V
    assert view.start()
    qtbot.wait(1300)
    view.keep_bar.seconds.setValue(1)
    job = view.keep()
    assert job is not None
    qtbot.waitUntil(lambda: view.keep_bar.button.isEnabled(), timeout=15000)
    rows = ctx.archive().runs(POINT_V)
    assert len(rows) == 1 and ctx.archive().runs(POINT_H) == []
    rec, info = ctx.archive().read_run(rows[0].run_id)
    assert info.sample_rate_hz == 25600.0 and rec.fs_hz == 25600.0
    assert rec.n_samples == 25600  # one second at 25.6 kHz
    assert rec.channels[0].unit == "g"
    assert info.rpm == pytest.approx(1480.0)
    assert "kept as run" in view.status.text()
    # Analysed and evaluated as on import: results stored, a state given.
    res = ctx.archive().results(rows[0].run_id)
    assert res is not None and res.spectrum is not None
    assert ctx.archive().point_states()[POINT_V]["run_id"] == rows[0].run_id


def test_replayed_wav_feeds_the_same_spectrum_as_compute_spectrum(view, qtbot, tmp_path, rng):
    fs = 25600.0
    t = np.arange(int(0.6 * fs)) / fs
    x = 0.3 * np.sin(2 * np.pi * 137.5 * t) + 0.05 * rng.standard_normal(t.size)
    path = write_wav(tmp_path / "replay.wav", Recording(fs_hz=fs, channels=[Channel(x, "g")]))
    samples = read_recording(path).channels[0].samples  # what the file holds (float32)
    panel = view.source_panel
    assert panel.set_kind("replay")
    panel.replay.set_file(str(path))
    panel.replay.loop.setChecked(False)
    qtbot.wait(20)  # the view offers the Fmax values of the file's rate
    sp = view.spectrum_panel
    sp.set_fmax(fs / 2.56)
    choose(sp.lines, 400)
    choose(sp.window, "hann")
    choose(sp.averaging, "linear")
    sp.averages.setValue(1000)
    choose(sp.overlap, 0.5)
    choose(sp.scale, "peak")
    qtbot.wait(20)
    assert view.start()
    qtbot.waitUntil(lambda: "finished" in view.status.text(), timeout=5000)
    ref = compute_spectrum(samples, fs, settings=SpectrumSettings(
        lines=400, window="hann", averaging="linear", overlap=0.5, scale="peak"))
    assert view.spectrum.frames == ref.averages
    f, y = shown_spectrum(view)
    np.testing.assert_allclose(f, ref.frequency_hz, rtol=1e-12)
    np.testing.assert_allclose(y, ref.amplitude, rtol=1e-9, atol=1e-12 * ref.amplitude.max())


def test_a_run_of_the_archive_is_replayed(ctx, qtbot):
    sig = MachineSignal(rpm=2975.0, speed_wobble=0.0, orders={2.0: (0.4, 0.0)})
    rec = synthesize(sig, fs_hz=25600.0, duration_s=2.0)
    with ctx.writer() as arc:
        run_id = arc.import_recording(rec, POINT_H).run_id
    ctx.reload()
    v = LiveView(ctx)
    qtbot.addWidget(v)
    v.show_point(POINT_H, run_id)  # offered first for replay
    page = v.source_panel.replay
    assert page.from_run.isChecked() and page.run.currentData() == run_id
    assert v.source_panel.set_kind("replay")
    choose(v.spectrum_panel.window, "flat-top")
    qtbot.wait(20)
    assert v.start()
    assert run_id[:10] in v.source.description
    qtbot.waitUntil(lambda: v.spectrum.frames >= 3, timeout=5000)
    f, amp = sine_spectrum_peak(*shown_spectrum(v))
    # 2× of 2975 rpm is 2 · 2975/60 Hz; a sine of 0.4 g reads 0.4 g peak (first principles).
    assert abs(f - 2 * 2975.0 / 60.0) <= v.spectrum.resolution_hz
    assert amp == pytest.approx(0.4, rel=0.02)
    v.stop()


def test_a_bad_recording_is_reported_in_a_dialog(view, qtbot, tmp_path):
    bad = tmp_path / "broken.wav"
    bad.write_bytes(b"RIFF junk")
    assert view.source_panel.set_kind("replay")
    view.source_panel.replay.set_file(str(bad))
    assert view.last_message is not None and "broken.wav" in view.last_message.text()
    assert not view.start()
    assert "replay" in view.last_message.text()


# -- sound card ---------------------------------------------------------------------------
class _RaiseOnImport(importlib.abc.MetaPathFinder):
    def __init__(self, name: str, exc: Exception):
        self.name, self.exc = name, exc

    def find_spec(self, fullname, path, target=None):
        if fullname == self.name:
            raise self.exc
        return None


def test_sound_card_choice_says_why_when_sounddevice_is_missing(ctx, qtbot, monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", None)  # import raises ImportError
    v = LiveView(ctx)
    qtbot.addWidget(v)
    panel = v.source_panel
    item = panel.kind.model().item(panel.kind.findData("sound card"))
    assert not item.isEnabled()
    reason = panel.sound_note.text()
    assert not panel.sound_note.isHidden()  # shown under the source picker
    assert "not installed" in reason and "not available" in item.text()
    assert "pip install sounddevice" in reason and "libportaudio2" in reason
    assert item.toolTip() == reason
    assert not panel.set_kind("sound card")
    assert v.start()  # the simulated machine still works
    v.stop()


def test_missing_portaudio_is_named(monkeypatch):
    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(sys, "meta_path", [_RaiseOnImport(
        "sounddevice", OSError("PortAudio library not found"))] + sys.meta_path)
    status = sound_card_status()
    assert not status.available
    assert "PortAudio library could not be loaded" in status.reason
    assert "libportaudio2" in status.reason


def _fake_sounddevice(amplitude_fs: float, tone_hz: float) -> types.ModuleType:
    """A stand-in for python-sounddevice: one stereo input whose second channel holds
    a tone; PortAudio's thread is a Python thread calling the callback in real time."""
    sd = types.ModuleType("sounddevice")
    sd.query_devices = lambda: [{"name": "Bench input", "index": 0, "max_input_channels": 2,
                                 "default_samplerate": 48000.0}]

    def check_input_settings(device=None, channels=None, samplerate=None):
        if samplerate not in (44100, 48000):
            raise ValueError("Invalid sample rate")
    sd.check_input_settings = check_input_settings

    class InputStream:
        def __init__(self, device, channels, samplerate, dtype, callback):
            self.fs, self.channels, self.callback = samplerate, channels, callback
            self._go = threading.Event()
            self._done = threading.Event()
            self._n = 0
            self._thread = threading.Thread(target=self._run, daemon=True)
            self._thread.start()

        def _run(self):
            block = 480
            while not self._done.is_set():
                if not self._go.wait(0.05):
                    continue
                i = self._n + np.arange(block)
                data = np.zeros((block, self.channels), dtype=np.float32)
                data[:, 1] = amplitude_fs * np.sin(2 * np.pi * tone_hz * i / self.fs)
                status = types.SimpleNamespace(input_overflow=self._n == 0)
                self.callback(data, block, None, status)
                self._n += block
                time.sleep(block / self.fs)

        def start(self):
            self._go.set()

        def stop(self):
            self._go.clear()

        def close(self):
            self._done.set()
            self._thread.join(1.0)

    sd.InputStream = InputStream
    return sd


def test_sound_card_input_is_converted_with_the_sensitivity(ctx, qtbot, monkeypatch):
    # 0.05 of full scale at 1 V full scale is 50 mV; at 100 mV/g that is 0.5 g
    # (sensitivity arithmetic, first principles).
    monkeypatch.setitem(sys.modules, "sounddevice", _fake_sounddevice(0.05, 375.0))
    v = LiveView(ctx)
    qtbot.addWidget(v)
    panel = v.source_panel
    assert panel.set_kind("sound card")
    page = panel.sound_card
    assert page.device.count() == 1 and "Bench input" in page.device.currentText()
    assert [page.rate.itemData(i) for i in range(page.rate.count())] == [48000.0, 44100.0]
    page.channel.setValue(2)
    page.sensitivity.setValue(100.0)
    page.full_scale.setValue(1.0)
    choose(v.spectrum_panel.window, "flat-top")
    qtbot.wait(20)
    assert v.start()
    qtbot.waitUntil(lambda: v.spectrum.frames >= 4, timeout=5000)
    f, amp = sine_spectrum_peak(*shown_spectrum(v))
    assert abs(f - 375.0) <= v.spectrum.resolution_hz
    assert amp == pytest.approx(0.5, rel=0.02)
    v._update_status()
    assert "dropped blocks: 1" in v.status.text()  # the stand-in reports one overflow
    v.stop()
