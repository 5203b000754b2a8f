"""The import dialog on a small archive with two points mapped by file-name patterns."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import threading  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import pytest  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402

import app.import_dialog as import_dialog  # noqa: E402
from app.context import AppContext, Preferences  # noqa: E402
from app.import_dialog import SKIP, ImportDialog  # noqa: E402
from engine.archive import create_archive, open_archive  # noqa: E402
from engine.io import write_wav  # noqa: E402
from engine.recording import Channel, Recording  # noqa: E402

SITE = "Works"
DE, NDE = f"{SITE}/P-101/motor DE H", f"{SITE}/P-101/motor NDE H"
FS_HZ = 5120.0


def wav(path: Path, seed: int) -> Path:
    """A 0.8 s tone in noise, in g, different for every seed."""
    rng = np.random.default_rng(seed)
    t = np.arange(4096) / FS_HZ
    x = 0.5 * np.sin(2 * np.pi * (90.0 + seed) * t) + 0.02 * rng.standard_normal(t.size)
    return write_wav(path, Recording(fs_hz=FS_HZ, channels=[Channel(x, "g", name="ch1")]))


@pytest.fixture
def ctx(tmp_path):
    path = tmp_path / "small.shaftwatch"
    with create_archive(path, plant_name="Small Works") as arc:
        arc.add_site(SITE)
        arc.add_machine(SITE, "P-101", nominal_rpm=1480.0)
        arc.add_point(SITE, "P-101", "motor DE H", direction="H", unit="g",
                      mapping_patterns=["P-101_DE_*.wav"])
        arc.add_point(SITE, "P-101", "motor NDE H", direction="H", unit="g",
                      mapping_patterns=["P-101_NDE_*.wav"])
    prefs = Preferences(QSettings(str(tmp_path / "prefs.ini"), QSettings.Format.IniFormat))
    c = AppContext(path, prefs=prefs)
    yield c
    c.close()


@pytest.fixture
def dialog(qtbot, ctx):
    d = ImportDialog(ctx, None)
    qtbot.addWidget(d)
    return d


def run_count(ctx) -> int:
    with open_archive(ctx.archive_path, mode="r") as arc:
        return len(arc.runs())


def table(d) -> list[tuple[str, str, str]]:
    return [(d.table.item(r, 0).text(), d.table.cellWidget(r, 1).currentText(),
             d.table.item(r, 2).text()) for r in range(d.table.rowCount())]


def results(d) -> list[str]:
    return [d.table.item(r, 3).text() for r in range(d.table.rowCount())]


def do_import(qtbot, d):
    with qtbot.waitSignal(d.import_finished, timeout=20000) as blocker:
        d.import_button.click()
    return blocker.args[0]


def test_two_files_by_pattern_then_duplicates(qtbot, dialog, ctx, tmp_path):
    survey = tmp_path / "survey"
    survey.mkdir()
    wav(survey / "P-101_DE_0815.wav", 1)
    wav(survey / "P-101_NDE_0819.wav", 2)
    changes = []
    ctx.archive_changed.connect(lambda: changes.append(1))
    dialog.set_inputs([survey])
    assert table(dialog) == [
        ("P-101_DE_0815.wav", DE, "pattern P-101_DE_*.wav"),
        ("P-101_NDE_0819.wav", NDE, "pattern P-101_NDE_*.wav")]
    assert dialog.import_button.isEnabled()
    summary = do_import(qtbot, dialog)
    assert (len(summary.imported), len(summary.duplicates), len(summary.skipped)) == (2, 0, 0)
    assert {d["point"] for d in summary.imported} == {DE, NDE}
    assert dialog.summary_text.toPlainText().startswith("Imported 2, duplicates 0, skipped 0.")
    assert run_count(ctx) == 2
    assert changes and len(ctx.archive().runs()) == 2  # ctx.reload() after the import
    assert results(dialog) == ["imported", "imported"]
    # The same folder again: the archive knows both files, nothing is added.
    dialog.set_inputs([survey])
    summary = do_import(qtbot, dialog)
    assert (len(summary.imported), len(summary.duplicates)) == (0, 2)
    assert "Imported 0, duplicates 2" in dialog.status_label.text()
    assert run_count(ctx) == 2
    assert results(dialog) == ["already in the archive"] * 2
    assert dialog.error_box is None


def test_unmapped_file_is_skipped_until_a_point_is_chosen(qtbot, dialog, ctx, tmp_path):
    survey = tmp_path / "survey"
    survey.mkdir()
    wav(survey / "pump_side.wav", 3)
    dialog.set_inputs([survey])
    [(name, point, mapping)] = table(dialog)
    assert (name, point) == ("pump_side.wav", SKIP)
    assert mapping.startswith("skipped: no point's file-name pattern matches")
    assert not dialog.import_button.isEnabled()
    combo = dialog.table.cellWidget(0, 1)
    combo.setCurrentIndex(combo.findData(NDE))
    assert table(dialog)[0][2] == "chosen by hand"
    summary = do_import(qtbot, dialog)
    assert [d["point"] for d in summary.imported] == [NDE]
    # The choice is remembered as a pattern (engine.importer.remembered_pattern).
    assert summary.remembered == {NDE: ["pump_side.wav"]}
    assert ctx.archive().point(NDE).mapping_patterns == ["P-101_NDE_*.wav", "pump_side.wav"]


def test_unreadable_file_is_reported_and_stores_nothing(qtbot, dialog, ctx, tmp_path):
    survey = tmp_path / "survey"
    survey.mkdir()
    bad = survey / "P-101_DE_0900.wav"
    bad.write_bytes(np.random.default_rng(7).bytes(3000))
    before = run_count(ctx)
    dialog.set_inputs([survey])
    assert table(dialog)[0][1] == DE  # mapped by its name; only reading it fails
    summary = do_import(qtbot, dialog)
    assert summary.imported == [] and len(summary.skipped) == 1
    assert run_count(ctx) == before
    assert results(dialog) == ["not read"]
    box = dialog.error_box
    assert box is not None and box.isVisible()
    assert "could not be read" in box.text() and "nothing was stored" in box.text()
    assert bad.name in box.informativeText() and "not a WAV file" in box.informativeText()
    assert "What to do:" in box.informativeText()
    assert "Traceback" not in box.informativeText()
    assert f"skipped {bad.name}: not a WAV file" in dialog.summary_text.toPlainText()


def test_bad_file_beside_good_ones_leaves_the_good_ones(qtbot, dialog, ctx, tmp_path):
    survey = tmp_path / "survey"
    survey.mkdir()
    wav(survey / "P-101_DE_0815.wav", 1)
    (survey / "P-101_NDE_0819.wav").write_bytes(b"RIFF\x00\x00")
    dialog.set_inputs([survey])
    summary = do_import(qtbot, dialog)
    assert [Path(d["file"]).name for d in summary.imported] == ["P-101_DE_0815.wav"]
    assert [Path(s["file"]).name for s in summary.skipped] == ["P-101_NDE_0819.wav"]
    assert run_count(ctx) == 1
    assert "The other files were imported" in dialog.error_box.text()


def test_stop_keeps_the_runs_stored_so_far(qtbot, dialog, ctx, tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    survey.mkdir()
    for i in range(3):
        wav(survey / f"P-101_DE_{i:04d}.wav", 10 + i)
    first_done, stop_pressed = threading.Event(), threading.Event()
    real = import_dialog.run_import

    def held(plan, *, progress=None, cancel=None, **kw):
        def hold(done, total, file):
            progress(done, total, file)
            if done == 1:
                first_done.set()
                stop_pressed.wait(10.0)
        return real(plan, progress=hold, cancel=cancel, **kw)

    monkeypatch.setattr(import_dialog, "run_import", held)
    dialog.set_inputs([survey])
    with qtbot.waitSignal(dialog.import_finished, timeout=20000) as blocker:
        dialog.import_button.click()
        assert first_done.wait(10.0)
        assert dialog.stop_button.isEnabled()
        dialog.stop_button.click()
        stop_pressed.set()
    summary = blocker.args[0]
    assert summary.cancelled and len(summary.imported) == 1
    assert run_count(ctx) == 1
    assert dialog.summary_text.toPlainText().startswith("Stopped by the user. Imported 1")
    assert [r.split(" (")[0] for r in results(dialog)] == ["imported", "not reached",
                                                           "not reached"]
    assert not dialog.stop_button.isEnabled() and dialog.import_button.isEnabled()


def test_archive_locked_by_another_writer_is_a_message(qtbot, dialog, ctx, tmp_path):
    survey = tmp_path / "survey"
    survey.mkdir()
    wav(survey / "P-101_DE_0815.wav", 1)
    dialog.set_inputs([survey])
    with open_archive(ctx.archive_path, mode="w", command="another writer"):
        with qtbot.waitSignal(dialog.import_failed, timeout=20000) as blocker:
            dialog.import_button.click()
    assert blocker.args[0]
    assert dialog.error_box.isVisible()
    assert "What to do:" in dialog.error_box.informativeText()
    assert run_count(ctx) == 0


def test_missing_folder_is_listed_with_its_reason(dialog, tmp_path):
    dialog.set_inputs([tmp_path / "nowhere"])
    [(name, point, mapping)] = table(dialog)
    assert point == SKIP and "no such file or folder" in mapping
    assert not dialog.import_button.isEnabled()
