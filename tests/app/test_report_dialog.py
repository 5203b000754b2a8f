"""The report dialog on the demo archive: P-102's machine report as PDF, an older
survey as HTML, stopping a report, and a report to a folder that does not exist."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402
from pypdf import PdfReader  # noqa: E402

import app.report_dialog as report_dialog  # noqa: E402
from app.report_dialog import ReportDialog, default_name, with_suffix  # noqa: E402

P102_DE = "Demo Works/P-102/pump DE H"
F201_FAN = "Demo Works/F-201/fan DE H"


@pytest.fixture
def out(tmp_path):
    """An empty folder for the reports (tmp_path also holds the preferences file)."""
    folder = tmp_path / "reports"
    folder.mkdir()
    return folder


@pytest.fixture
def dialog(qtbot, app_context):
    app_context.select_point(P102_DE)
    d = ReportDialog(app_context, None)
    qtbot.addWidget(d)
    with qtbot.waitSignal(d.loaded, timeout=20000):
        d.show()
    yield d
    app_context.jobs.stop_all()


def test_lists_machines_and_surveys(dialog, app_context):
    arc = app_context.archive()
    tags = [dialog.machine_combo.itemData(i).tag for i in range(dialog.machine_combo.count())]
    assert tags == ["B-301", "F-201", "G-401", "M-501", "P-101", "P-102"]
    assert dialog.machine_combo.currentData().tag == "P-102"   # the selected point's machine
    assert dialog.machine_radio.isChecked()
    # One survey a week (engine.demo_plant): as many surveys as runs of one point, each
    # holding one run of every point.
    assert dialog.survey_combo.count() == len(arc.runs(P102_DE))
    first = dialog.survey_combo.itemData(0)
    assert first.date == "" and first.runs == len(arc.points())
    assert "(newest)" in dialog.survey_combo.itemText(0)
    assert Path(dialog.path_edit.text()).name.startswith("P-102_report_")
    assert dialog.path_edit.text().endswith(".pdf")


def test_file_name_follows_format_and_scope(dialog, out):
    dialog.set_format(".html")
    assert dialog.path_edit.text().endswith(".html")
    dialog.choose_survey(dialog.survey_combo.itemData(2).end_date)
    assert "survey-" in Path(dialog.path_edit.text()).name
    dialog.set_path(out / "mine.pdf")                 # a typed suffix picks the format
    assert dialog.suffix == ".pdf"
    dialog.set_format(".html")                             # and a typed name is kept
    assert dialog.path_edit.text() == str(out / "mine.html")
    assert with_suffix("/a/b", ".pdf") == "/a/b.pdf"
    assert default_name("P-102", ".pdf", today="2026-12-02") == "P-102_report_2026-12-02.pdf"


def test_machine_report_pdf(qtbot, dialog, out, monkeypatch):
    target = out / "p102.pdf"
    dialog.set_path(target)
    with qtbot.waitSignal(dialog.report_written, timeout=90000) as blocker:
        dialog.export()
    assert blocker.args == [str(target)]
    text = "\n".join(page.extract_text() for page in PdfReader(target).pages)
    assert "P-102" in text and "Machine report" in text
    assert "danger" in text                  # P-102's pump DE H is in danger (demo truth)
    assert sorted(p.name for p in out.iterdir()) == ["p102.pdf"]   # no leftovers
    box = dialog.success_box
    assert box is not None and str(target) in box.informativeText()
    opened = []
    monkeypatch.setattr(report_dialog.QDesktopServices, "openUrl",
                        lambda url: opened.append(url.toLocalFile()) or True)
    dialog.open_folder_button.click()
    assert opened == [str(out)]
    assert not dialog.progress.isVisible() and dialog.export_button.isEnabled()


@pytest.mark.slow
def test_survey_report_html_of_a_chosen_date(qtbot, dialog, out):
    # The survey of week 6 (2026-09-07), before any machine left its healthy state.
    date = "2026-09-07"
    dialog.choose_survey(date)
    target = out / "survey.html"
    dialog.set_path(target)
    with qtbot.waitSignal(dialog.report_written, timeout=90000):
        dialog.export()
    html = target.read_text(encoding="utf-8")
    assert f"Survey report {date}" in html
    for tag in ("B-301", "F-201", "G-401", "M-501", "P-101", "P-102"):
        assert tag in html


def test_cancel_leaves_no_file(qtbot, dialog, out):
    target = out / "stopped.pdf"
    dialog.set_path(target)
    with qtbot.waitSignal(dialog.report_cancelled, timeout=60000):
        dialog.export()
        assert dialog.stop_button.isEnabled()
        dialog.stop_button.click()
    assert not target.exists()
    assert list(out.iterdir()) == []                 # no partial or temporary file
    assert "no file" in dialog.status.text()
    assert dialog.export_button.isEnabled() and not dialog.stop_button.isEnabled()


def test_missing_folder_is_an_error_dialog(qtbot, dialog, out):
    target = out / "no such folder" / "r.pdf"
    dialog.set_path(target)
    with qtbot.waitSignal(dialog.report_failed, timeout=5000) as blocker:
        dialog.export()
    assert "no such folder" in blocker.args[0]
    assert dialog.error_box is not None and dialog.error_box.isVisible()
    assert "Traceback" not in dialog.error_box.informativeText()
    assert not target.parent.exists()
