"""Reports from the demo archive: machine and survey content, PDF/HTML, the command.

The PDF is read back with pypdf and the HTML with the standard library's html.parser
(independent readers), so the checks see what a reader of the files sees.  Expected
states come from the demo plant's story (PRODUCT.md, "Demo plant": P-102's pump
drive-end bearing develops an outer-race defect — alert at week 12, danger at 15;
B-301's 2× jumps after week 10; P-101, G-401 and M-501 stay ok).
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
import threading
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import pytest
from pypdf import PdfReader

from engine.archive import create_archive, open_archive
from engine.cli import main as cli_main
from engine.errors import InputError
from engine.report import CAUTIONS, ReportCancelled, render
from engine.report.assemble import (SURVEY_SPAN_DAYS, find_machine, find_survey,
                                    machine_report, state_counts, summary_line,
                                    survey_report, surveys)
from engine.report.data import iso_date
from engine.report.point_content import (defect_families, evidence_markers, evidence_text,
                                         marker_label)
from engine.trends import trend

SITE = "Demo Works"
P102 = f"{SITE}/P-102"
DAY = 86400.0
ROOT = Path(__file__).resolve().parents[1]


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


def _pdf_text(path: Path) -> str:
    return _flat(" ".join(p.extract_text() for p in PdfReader(str(path)).pages))


class _Tables(HTMLParser):
    """The cells of every table of an HTML file, row by row."""

    def __init__(self) -> None:
        super().__init__()
        self.tables: list[list[list[str]]] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.tables.append([])
        elif tag == "tr" and self.tables:
            self.tables[-1].append([])
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][-1].append(_flat("".join(self._cell)).strip())
            self._cell = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def _html(path: Path) -> tuple[str, list[list[list[str]]]]:
    text = path.read_text(encoding="utf-8")
    parser = _Tables()
    parser.feed(text)
    return _flat(re.sub(r"<[^>]+>", " ", text)), parser.tables


@pytest.fixture(scope="module")
def arc(demo_archive_path):
    with open_archive(demo_archive_path) as a:
        yield a


@pytest.fixture(scope="module")
def p102_cli(demo_archive_path, tmp_path_factory):
    """``shaftwatch report --machine P-102`` run headless in a fresh interpreter (no
    display, no Qt platform, no matplotlib backend chosen)."""
    out = tmp_path_factory.mktemp("p102") / "p102.pdf"
    env = {k: v for k, v in os.environ.items()
           if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM", "MPLBACKEND")}
    code = ("import sys\n"
            "from engine.cli import main\n"
            f"rc = main(['report', {str(demo_archive_path)!r}, '--machine', 'P-102', "
            f"'-o', {str(out)!r}])\n"
            "assert 'PySide6' not in sys.modules, 'the report imported Qt'\n"
            "sys.exit(rc)\n")
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=120)
    return SimpleNamespace(rc=done.returncode, stdout=done.stdout, stderr=done.stderr,
                           pdf=out)


@pytest.fixture(scope="module")
def survey(arc):
    return survey_report(arc)


def test_p102_pdf_headless_holds_status_markers_finding_forecast_caution(p102_cli, arc):
    assert "Traceback" not in p102_cli.stderr
    assert p102_cli.rc == 1, p102_cli.stderr            # P-102 is in danger
    assert p102_cli.pdf.is_file()
    pages = len(PdfReader(str(p102_cli.pdf)).pages)
    assert f"report  {p102_cli.pdf}" in p102_cli.stdout
    assert re.search(rf"^pages\s+{pages}$", p102_cli.stdout, re.M)
    assert "1 danger, 1 alert, 1 ok" in p102_cli.stdout
    text = _pdf_text(p102_cli.pdf)
    states = arc.point_states()
    # Demo story (PRODUCT.md): the pump DE bearing is in danger at week 16.
    assert states[f"{P102}/pump DE H"]["state"] == "danger"
    assert "P-102" in text and "Raw-water pump 2" in text
    for point in ("motor DE H", "pump DE H", "pump DE V"):
        assert f"{point} {states[f'{P102}/{point}']['state']} " in text
    assert "danger" in text and "alert" in text
    assert re.search(r"\bBPFO\b", text)                 # a marker label and the caption
    r = arc.results(states[f"{P102}/pump DE H"]["run_id"])
    assert _flat(r.findings[0]["title"]) in text
    fc = trend(arc, f"{P102}/pump DE V", "overall_velocity_mm_s").forecast
    assert fc.status == "forecast" and math.isfinite(fc.danger_date_s)
    assert iso_date(fc.danger_date_s) in text
    assert _flat(CAUTIONS[0]) in text


def test_machine_report_chooses_the_values_spectra_and_findings_that_matter(arc):
    data = machine_report(arc, SITE, "P-102")
    shown = {(t.point, t.value) for t in data.trends}
    # Every point's overall velocity; the 1× band of the pump DE H in alert
    # (its latest run's band state); the BPFO line of its bearing finding.
    assert {("P-102 motor DE H", "overall velocity"), ("P-102 pump DE H", "overall velocity"),
            ("P-102 pump DE H", "band 1x"),
            ("P-102 pump DE H", "BPFO envelope line")} <= shown
    r = arc.results(arc.point_states()[f"{P102}/pump DE H"]["run_id"])
    assert {b["band"]: b["state"] for b in r.bands}["1x"] in ("alert", "danger")
    # No band of the healthy motor point is shown unless it rises.
    for point, value in shown:
        if point == "P-102 motor DE H" and value.startswith("band "):
            td = trend(arc, f"{P102}/motor DE H", "band:" + value[5:])
            assert td.forecast.status == "forecast"
    # BPFO from the bearing geometry (Harris & Kotzalas, Rolling Bearing Analysis):
    # BPFO = n/2 · f_r · (1 − d/D · cos α); the envelope line may sit 1–2 % off for
    # slip (Randall & Antoni 2011), so the marker must lie within 2 %.
    model = arc.machine_model(SITE, "P-102")
    g = next(b.geometry for b in model.bearings if b.label == "pump DE")
    f_r = r.rpm / 60.0
    bpfo = g.elements / 2 * f_r * (1 - g.element_diameter / g.pitch_diameter
                                   * math.cos(math.radians(g.contact_angle_deg)))
    env = next(s for s in data.spectra if s.kind == "envelope" and s.point.endswith("pump DE H"))
    mark = dict((label, f) for f, label in env.markers)["BPFO"]
    assert abs(mark / bpfo - 1) < 0.02
    # Order bands shaded in Hz: 1x spans 0.9–1.1 × shaft speed (first principles).
    spec = next(s for s in data.spectra if s.kind == "spectrum" and s.point.endswith("pump DE H"))
    lo, hi = next((b[0], b[1]) for b in spec.bands if b[4] == "1x")
    assert lo == pytest.approx(0.9 * f_r) and hi == pytest.approx(1.1 * f_r)
    assert all(f.severity != "info" or f.point in ("pump DE H", "pump DE V")
               for f in data.findings)
    assert [f.point for f in data.findings] == ["pump DE H", "pump DE V"]
    assert data.cautions == CAUTIONS
    assert any("Generic limits from ISO 20816-3" in n for n in data.notes)
    assert any("P-102 pump DE H" in n and "Alarm plans" in n for n in data.notes)


def test_since_crops_the_trends_but_not_the_forecast(arc):
    full = machine_report(arc, SITE, "P-102")
    t_last = max(float(t.times_s.max()) for t in full.trends)
    since = t_last - 30 * DAY
    cropped = machine_report(arc, SITE, "P-102", since_s=since)
    assert len(cropped.trends) == len(full.trends)
    for a, b in zip(full.trends, cropped.trends):
        assert (b.times_s >= since).all() and b.times_s.size < a.times_s.size
        assert a.forecast["danger_date"] == b.forecast["danger_date"]
    with pytest.raises(InputError, match="since_s"):
        machine_report(arc, SITE, "P-102", since_s="yesterday")


def test_survey_lists_every_machine_and_state_in_pdf_and_html(arc, survey, tmp_path):
    tags = [t for s in arc.plant.sites.values() for t in s.machines]
    assert sorted({r.machine for r in survey.status}) == sorted(tags)
    assert len(survey.status) == len(arc.points())
    states = arc.point_states()       # the newest survey is the archive's state now
    for row in survey.status:
        assert row.state == states[f"{SITE}/{row.machine}/{row.point}"]["state"]
    by_machine = {}
    for row in survey.status:
        by_machine.setdefault(row.machine, set()).add(row.state)
    # Demo story (PRODUCT.md): P-102 in danger, B-301 in alert after its motor change,
    # P-101, G-401 and M-501 healthy.
    assert "danger" in by_machine["P-102"]
    assert "alert" in by_machine["B-301"]
    for healthy in ("P-101", "G-401", "M-501"):
        assert by_machine[healthy] == {"ok"}
    pdf = render(survey, tmp_path / "survey.pdf")
    html = render(survey, tmp_path / "survey.html")
    text = _pdf_text(pdf)
    html_text, tables = _html(html)
    rows = {(r[0], r[1]): r[2] for r in tables[0][1:]}
    for row in survey.status:
        name = arc.plant.machine(SITE, row.machine).props["name"]
        assert f"{row.machine} \u2014 {name} {row.point} {row.state} " in text
        assert rows[(f"{row.machine} \u2014 {name}", row.point)] == row.state
    for body in (text, html_text):
        assert survey.scope in body and _flat(CAUTIONS[-1]) in body
        assert re.search(r"\bBPFO\b", body)
        assert "Bearing defect at BPFO" in body
    assert summary_line(survey).startswith(f"{len(arc.points())} points: 1 danger")


def test_survey_of_an_earlier_date_and_the_survey_rule(arc):
    found = surveys(arc)
    assert len(found) == 16                 # sixteen weekly surveys (PRODUCT.md)
    newest = found[0]
    assert find_survey(arc) == newest
    week14 = find_survey(arc, iso_date(newest.end_s - 14 * DAY))
    assert week14 == found[2]
    data = survey_report(arc, date=iso_date(week14.start_s), machines=["P-102", "P-101"])
    assert sorted({r.machine for r in data.status}) == ["P-101", "P-102"]
    row = next(r for r in data.status if r.machine == "P-102" and r.point == "pump DE H")
    assert row.state == "alert"             # alert from week 12, danger from 15
    assert all(t.times_s.max() <= week14.end_s for t in data.trends)
    with pytest.raises(InputError, match="surveys: 2026"):
        find_survey(arc, "1999-01-01")
    with pytest.raises(InputError, match="ISO date"):
        find_survey(arc, "16/11/2026")
    with pytest.raises(InputError, match="machines: B-301"):
        survey_report(arc, machines=["X-999"])


def test_surveys_group_runs_within_three_days_of_the_newest():
    # Runs at 10, 9, 7.5 days: within SURVEY_SPAN_DAYS (3) of the newest; 6.9 and 6
    # days: a survey of their own (first principles of the rule).
    days = [10.0, 9.0, 7.5, 6.9, 6.0]
    fake = SimpleNamespace(runs=lambda: [SimpleNamespace(taken_s=d * DAY) for d in days])
    assert SURVEY_SPAN_DAYS == 3.0
    got = [(s.start_s / DAY, s.end_s / DAY, s.runs) for s in surveys(fake)]
    assert got == [(7.5, 10.0, 3), (6.0, 6.9, 2)]


def test_cli_exit_status_and_json(demo_archive_path, tmp_path, capsys):
    out = tmp_path / "p101.html"
    assert cli_main(["report", str(demo_archive_path), "--machine", "P-101", "-o", str(out),
                     "--json"]) == 0                     # P-101 stays ok
    d = json.loads(capsys.readouterr().out)
    assert d["report"] == str(out) and out.is_file() and "pages" not in d
    assert d["states"]["ok"] == 3 and d["worst"] == "ok" and d["exit_status"] == 0
    assert cli_main(["report", str(demo_archive_path), "--machine", "Q-9",
                     "-o", str(tmp_path / "q.pdf")]) == 2
    err = capsys.readouterr().err
    assert "no machine 'Q-9'" in err and "P-101, P-102" in err
    docx = tmp_path / "p102.docx"
    assert cli_main(["report", str(demo_archive_path), "--machine", "P-102",
                     "-o", str(docx)]) == 2
    assert ".docx" in capsys.readouterr().err and not docx.exists()
    assert cli_main(["report", str(demo_archive_path), "--survey", "1999-01-01",
                     "-o", str(tmp_path / "s.pdf")]) == 2
    assert list(tmp_path.iterdir()) == [out]


def test_cancel_leaves_no_file_and_progress_counts(arc, tmp_path):
    steps = []
    with pytest.raises(ReportCancelled):
        machine_report(arc, SITE, "P-102", progress=lambda *a: steps.append(a),
                       cancel=lambda: len(steps) >= 1)
    assert steps == [(1, 4, "P-102 motor DE H")]
    seen = []
    data = machine_report(arc, SITE, "P-102", progress=lambda *a: seen.append(a))
    assert [s[0] for s in seen] == [1, 2, 3, 4] and all(s[1] == 4 for s in seen)
    stop = threading.Event()
    target = tmp_path / "p102.pdf"
    with pytest.raises(ReportCancelled):
        render(data, target, progress=lambda *a: stop.set(), cancel=stop)
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(ReportCancelled):
        survey_report(arc, cancel=lambda: True)


def test_find_machine_by_tag_and_ambiguous_tags(tmp_path, arc):
    assert find_machine(arc, "P-102") == (SITE, "P-102")
    assert find_machine(arc, f"{SITE}/B-301") == (SITE, "B-301")
    with create_archive(tmp_path / "two.shaftwatch", plant_name="Two sites") as two:
        for site in ("North", "South"):
            two.add_site(site)
            two.add_machine(site, "P-1", name=f"pump {site}")
        two.add_machine("South", "F-2", name="fan")
    with open_archive(tmp_path / "two.shaftwatch") as two:
        with pytest.raises(InputError, match="more than one site: North, South"):
            find_machine(two, "P-1")
        assert find_machine(two, "South/P-1") == ("South", "P-1")
        with pytest.raises(InputError, match="machines: North/P-1, South/") as err:
            find_machine(two, "X")
        assert "South/P-1" in str(err.value) and "South/F-2" in str(err.value)
        data = machine_report(two, "South", "F-2")
        assert data.status == [] and state_counts(data)["ok"] == 0
        with pytest.raises(InputError, match="no survey"):
            survey_report(two)


def test_evidence_becomes_markers_and_sentences():
    bearing = {"kind": "bearing", "title": "Bearing defect at BPFO, stage 2", "evidence": [
        {"description": "envelope line at 1×BPFO", "frequency_hz": 86.8, "amplitude": 0.0093,
         "unit": "g", "source_name": "BPFO"},
        {"description": "velocity line at 1×BPFO", "frequency_hz": 86.78, "amplitude": 2.13,
         "unit": "mm/s RMS", "source_name": "BPFO"},
        {"description": "broadband rise", "frequency_hz": None, "amplitude": 0.67,
         "unit": "mm/s RMS", "source_name": "broadband"}]}
    gear = {"kind": "gear_wear", "title": "Gear wear", "evidence": [
        {"description": "sideband -1× input", "frequency_hz": 543.6, "amplitude": 0.11,
         "unit": "mm/s RMS", "source_name": "gear mesh input–output -1× input"},
        {"description": "1×", "frequency_hz": 24.7, "amplitude": 0.6,
         "unit": "mm/s RMS", "source_name": "input 1×"}]}
    spec, env = evidence_markers([bearing, gear, bearing])
    assert env == [(86.8, "BPFO")]                        # g: the envelope spectrum
    assert sorted(spec) == [(24.7, "input 1×"), (86.78, "BPFO"), (543.6, "sideband -1× input")]
    assert marker_label(gear["evidence"][0]) == "sideband -1× input"
    assert defect_families([bearing, gear]) == ["BPFO"]
    assert evidence_text(bearing["evidence"][0]) == "envelope line at 1×BPFO: 86.8 Hz, 0.0093 g"
    assert evidence_text(bearing["evidence"][2]) == "broadband rise: 0.67 mm/s RMS"
    assert evidence_text(gear["evidence"][1]) == "1×: 24.7 Hz, 0.6 mm/s RMS (matched to input 1×)"
