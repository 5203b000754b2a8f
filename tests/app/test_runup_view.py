"""The run-up view on the demo plant's M-501 run-up (engine.demo_plant), imported into a
small archive of its own, and on a steady run without a tachometer."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import threading  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402

import app.runup_model as runup_model  # noqa: E402
from app.context import AppContext, Preferences  # noqa: E402
from app.runup_model import RunupSettings, nice_step, parse_orders  # noqa: E402
from app.runup_view import RunupView  # noqa: E402
from engine import demo_plant  # noqa: E402
from engine.archive import create_archive  # noqa: E402
from engine.errors import InputError  # noqa: E402

SITE = "Demo Works"
MIXER = f"{SITE}/M-501/mixer DE H"
PUMP = f"{SITE}/P-101/motor DE H"


@pytest.fixture(scope="module")
def archive_path(tmp_path_factory):
    """M-501's run-up (week RUNUP_WEEK) and one steady P-101 run without a tach."""
    path = tmp_path_factory.mktemp("runup") / "small.shaftwatch"
    runup = demo_plant.demo_recording("M-501", "mixer DE H", demo_plant.RUNUP_WEEK)
    steady = demo_plant.demo_recording("P-101", "motor DE H", 3, fs_hz=12800.0,
                                       duration_s=4.0)
    with create_archive(path, plant_name="Small Works") as arc:
        arc.add_site(SITE)
        arc.add_machine(SITE, "M-501", nominal_rpm=1200.0)
        arc.add_machine(SITE, "P-101", nominal_rpm=1480.0)
        arc.add_point(SITE, "M-501", "mixer DE H", direction="H", unit="g")
        arc.add_point(SITE, "P-101", "motor DE H", direction="H", unit="g")
        arc.import_recording(runup, MIXER)
        arc.import_recording(steady, PUMP)
    return path


@pytest.fixture
def view(qtbot, archive_path, tmp_path):
    prefs = Preferences(QSettings(str(tmp_path / "prefs.ini"), QSettings.Format.IniFormat))
    ctx = AppContext(archive_path, prefs=prefs)
    v = RunupView(ctx, None)
    qtbot.addWidget(v)
    v.resize(1200, 800)
    yield v
    ctx.close()


@pytest.fixture
def shown(qtbot, view):
    with qtbot.waitSignal(view.computed, timeout=30000) as blocker:
        view.show_point(MIXER, None)
    return view, blocker.args[0]


def test_order_spectrum_peaks_at_running_speed(shown):
    # First principles of the demo signal (engine.demo_plant, engine.simulate): the
    # mixer's largest component is 1× (0.9 mm/s, amplified by the 15 Hz resonance
    # that 1× crosses), and every order is cos(2π k θ(t)) in shaft angle θ, so after
    # angular resampling (Fyfe & Munck 1997) the largest line sits at order 1.00.
    v, result = shown
    orders, amplitude = v.spectrum_curve.getData()
    assert orders.size == result.spectrum.order.size > 100
    assert orders[1 + np.argmax(amplitude[1:])] == pytest.approx(1.0, abs=0.02)
    assert v.stack.currentWidget() is v.plots_page


def test_speed_profile_spans_the_run_up(shown):
    # demo_plant.RUNUP_PROFILE: 300 rpm for 1 s, a ramp to 1500 rpm, 1500 rpm for 1 s;
    # the 0.2 % speed wobble and the 4-revolution smoothing of engine.tach move the ends
    # by a few rpm at most.
    v, _ = shown
    t, rpm = v.profile_curve.getData()
    lo, hi = demo_plant.RUNUP_PROFILE[1][0], demo_plant.RUNUP_PROFILE[1][-1]
    assert rpm.min() == pytest.approx(lo, abs=10.0)
    assert rpm.max() == pytest.approx(hi, abs=10.0)
    assert t[-1] - t[0] > 0.9 * demo_plant.RUNUP_PROFILE[0][-1]
    assert np.all(np.diff(t) > 0)


def test_campbell_image_has_a_row_per_speed(shown):
    v, result = shown
    image = v.campbell_image.image
    rows = result.campbell_rpm
    assert image.shape == (rows.size, result.campbell_hz.size)
    step = nice_step((result.profile_rpm.max() - result.profile_rpm.min())
                     / runup_model.CAMPBELL_ROWS)
    assert np.allclose(np.diff(rows), step)
    # A row per speed level (20 rpm apart over 300 → 1500 rpm): each level is first
    # reached at least half a 1 s frame inside the 10 s record (300 rpm at about 0.5 s,
    # where the 4-revolution speed average starts; 1500 rpm at about 9 s), so all fit.
    assert rows[0] == pytest.approx(300.0, abs=20.0) and rows[-1] == pytest.approx(1500.0)
    assert rows.size >= (1500.0 - 320.0) / step
    rect = v.campbell_image.mapRectToParent(v.campbell_image.boundingRect())
    assert rect.left() <= rows[0] and rect.right() >= rows[-1]
    # Fmax of the spectra: the max order at the top speed (10 × 1500/60 = 250 Hz), or
    # just above it where a whole decimation of fs/2.56 lands (25600 / 2.56 / 39 Hz).
    wanted = 10.0 * result.profile_rpm.max() / 60.0
    assert wanted <= result.campbell_hz[-1] < 1.05 * wanted


def test_order_cut_shows_the_resonance_crossing(shown):
    # demo_plant.MIXER_RESONANCE is 15 Hz: 1× crosses it at 15 × 60 = 900 rpm and 2× at
    # 450 rpm (f = k · rpm / 60, first principles).
    v, result = shown
    rpm, amp = v.cut_curves[1.0].getData()
    assert rpm.size > 50 and rpm.min() < 400.0 and rpm.max() > 1450.0
    one = next(c for c in result.cuts if c.order == 1.0)
    assert len(one.resonances) == 1
    found = one.resonances[0].values
    assert found["rpm"] == pytest.approx(900.0, rel=0.03)
    assert found["frequency_hz"] == pytest.approx(demo_plant.MIXER_RESONANCE.frequency_hz,
                                                  rel=0.03)
    assert rpm[np.argmax(amp)] == pytest.approx(900.0, rel=0.03)
    two = next(c for c in result.cuts if c.order == 2.0)
    assert [round(r.values["frequency_hz"]) for r in two.resonances] == [15]
    # The marks drawn: one per resonance, at its (rpm, amplitude), and the fixed-Hz line
    # on the Campbell diagram.
    spots = v.resonance_points.data["x"]
    assert sorted(np.round(spots, -1)) == sorted(
        np.round([r.values["rpm"] for c in result.cuts for r in c.resonances], -1))
    assert result.resonance_hz() == [pytest.approx(15.0, rel=0.04)]
    assert "Resonance crossed at" in v.findings_label.text()


def test_changing_the_orders_recomputes(qtbot, shown):
    v, _ = shown
    v.orders_edit.setText("1, 4")
    with qtbot.waitSignal(v.computed, timeout=30000) as blocker:
        v.compute_button.click()
    assert [c.order for c in blocker.args[0].cuts] == [1.0, 4.0]
    assert sorted(v.cut_curves) == [1.0, 4.0]
    assert v.ctx.prefs.get("runup/cut_orders", "", str) == "1, 4"


def test_bad_order_list_is_a_message(qtbot, shown):
    v, _ = shown
    v.orders_edit.setText("1, two")
    with qtbot.waitSignal(v.failed, timeout=5000) as blocker:
        v.compute_button.click()
    assert "'two' is not a number" in blocker.args[0]
    assert v.error_box is not None and v.error_box.isVisible()


def test_run_without_tach_says_so_and_estimates_the_speed(qtbot, view):
    view.show_point(PUMP, None)
    qtbot.waitUntil(lambda: view.no_tach is not None, timeout=30000)
    assert view.stack.currentWidget() is view.message_page
    assert "no tachometer channel" in view.message_label.text()
    assert view.estimate_button.isVisibleTo(view)
    with qtbot.waitSignal(view.estimated, timeout=30000) as blocker:
        view.estimate_button.click()
    # First principles: the simulated P-101 runs at demo_signal's rpm for week 3.
    _, info = demo_plant.demo_signal("P-101", "motor DE H", 3, fs_hz=12800.0)
    assert blocker.args[0].rpm == pytest.approx(info["rpm"], rel=0.005)
    assert f"{blocker.args[0].rpm:.0f} rpm" in view.estimate_label.text()


def test_cancel_stops_the_analysis(qtbot, view, monkeypatch):
    entered, release = threading.Event(), threading.Event()
    real = runup_model.order_spectrum

    def held(*args, **kwargs):
        entered.set()
        release.wait(10.0)
        return real(*args, **kwargs)

    monkeypatch.setattr(runup_model, "order_spectrum", held)
    view.show_point(MIXER, None)
    assert entered.wait(20.0)
    assert view.cancel_button.isEnabled()
    with qtbot.waitSignal(view.stopped, timeout=20000):
        view.cancel_button.click()
        release.set()
    assert view.result is None
    assert "Stopped" in view.status_label.text()
    assert not view.cancel_button.isEnabled()


def test_parse_orders():
    assert parse_orders("1, 2 4.5×") == (1.0, 2.0, 4.5)
    assert parse_orders("2,2,1") == (2.0, 1.0)
    for bad in ("", "0", "-1", "x1"):
        with pytest.raises(InputError, match="order cuts"):
            parse_orders(bad)
    assert RunupSettings().cut_orders == (1.0, 2.0)
