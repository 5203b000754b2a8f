"""Reports: PDF and HTML from a hand-built ReportData, read back and checked.

The PDF is read with pypdf (an independent reader) and the HTML with the standard
library's html.parser, so these tests see what a reader of the files sees.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
import threading
from datetime import UTC, datetime, timedelta
from html.parser import HTMLParser

import numpy as np
import pytest
from pypdf import PdfReader

from engine.errors import InputError
from engine.report import (CAUTIONS, FindingItem, ForecastItem, ReportCancelled, ReportData,
                           SpectrumPlot, StatusRow, TrendSeries, render, render_html,
                           render_pdf)
from engine.report.content import SECTIONS
from engine.report.plots import STATE_COLOURS, peak_decimate, place_marker_labels

START = datetime(2026, 8, 3, 8, 0, tzinfo=UTC)
WEEK_S = 7 * 86400.0
RPM = 1480.0
SHAFT_HZ = RPM / 60.0
BPFO_ORDER = 4.37            # invented bearing: outer-race defect at 4.37 × shaft speed
BPFO_HZ = BPFO_ORDER * SHAFT_HZ
FINDING_TITLE = "Outer-race defect at the pump drive-end bearing (stage 2)"


def _iso(t_s: float) -> str:
    return datetime.fromtimestamp(t_s, UTC).date().isoformat()


def _trend() -> TrendSeries:
    weeks = np.arange(1, 17)
    t = START.timestamp() + (weeks - 1) * WEEK_S
    v = 1.2 + 0.9 * (np.exp(0.127 * np.clip(weeks - 7, 0, None)) - 1.0)
    v = v + 0.03 * np.sin(weeks)  # a little scatter so the line is not perfectly clean
    curve_t = t[-1] + np.arange(0, 9) * WEEK_S
    curve_v = v[-1] * np.exp(0.127 * np.arange(0, 9))
    spread = 0.04 * np.arange(0, 9) * curve_v
    forecast = {
        "status": "forecast", "model": "exponential", "points_used": 8,
        "reason": "Exponential fit of the last 8 runs (r² 0.98) beats the linear one "
                  "(r² 0.91).",
        "slope_per_day": 0.127 / 7, "r2": 0.98,
        "alert_date_s": "", "alert_low_s": "", "alert_high_s": "",
        "danger_date_s": _iso(curve_t[3]), "danger_low_s": _iso(curve_t[2]),
        "danger_high_s": _iso(curve_t[5]),
        "curve_t_s": list(curve_t), "curve_value": list(curve_v),
        "curve_low": list(curve_v - spread), "curve_high": list(curve_v + spread),
    }
    return TrendSeries("P-102/pump DE H", "overall velocity", "mm/s", t, v,
                       alert=2.8, danger=4.5, forecast=forecast)


def _envelope(rng) -> SpectrumPlot:
    f = np.linspace(0.0, 500.0, 1601)
    a = 0.002 + 0.0005 * rng.random(f.size)
    for k, amp in ((1, 0.060), (2, 0.035), (3, 0.018)):
        a += amp * np.exp(-0.5 * ((f - k * BPFO_HZ) / 0.4) ** 2)
    markers = [(SHAFT_HZ, "1×"), (BPFO_HZ, "BPFO"), (2 * BPFO_HZ, "2×BPFO"),
               (3 * BPFO_HZ, "3×BPFO")]
    return SpectrumPlot("P-102/pump DE H", "r-0016-pde-h", "P-102 pump DE H — envelope, "
                        "week 16", "envelope", f, a, "g", markers=markers,
                        bands=[(80.0, 350.0, 0.05, 0.1, "envelope BPFO")])


def _velocity(rng) -> SpectrumPlot:
    f = np.linspace(0.0, 1000.0, 3201)
    a = 0.02 + 0.01 * rng.random(f.size)
    for hz, amp in ((SHAFT_HZ, 1.9), (2 * SHAFT_HZ, 0.6), (BPFO_HZ, 0.35)):
        a += amp * np.exp(-0.5 * ((f - hz) / 0.3) ** 2)
    return SpectrumPlot("P-102/pump DE H", "r-0016-pde-h", "P-102 pump DE H — velocity, "
                        "week 16", "spectrum", f, a, "mm/s",
                        markers=[(SHAFT_HZ, "1×"), (2 * SHAFT_HZ, "2×"), (BPFO_HZ, "BPFO")],
                        bands=[(10.0, 1000.0, 2.8, 4.5, "overall velocity")])


def demo_report(rng, *, status: list[StatusRow] | None = None,
                notes: list[str] | None = None) -> ReportData:
    last = _iso(START.timestamp() + 15 * WEEK_S)
    rows = status if status is not None else [
        StatusRow("P-101", "Raw-water pump 1", "motor DE H", "ok", "A", 1.21, last,
                  "overall velocity"),
        StatusRow("P-102", "Raw-water pump 2", "pump DE H", "alert", "C", 3.42, last,
                  "envelope BPFO", note="bearing finding"),
    ]
    finding = FindingItem(
        "P-102", "pump DE H", "r-0016-pde-h", last, FINDING_TITLE, "warning",
        [f"Envelope peaks at BPFO {BPFO_HZ:.1f} Hz and 2 harmonics, within 2 % of the "
         "bearing's outer-race frequency.",
         "Velocity floor 2.1 times its baseline (broadband rise)."],
        "Indication for a qualified person: plan a bearing inspection or change at the "
        "next stop, and shorten the measurement interval meanwhile.")
    forecast = ForecastItem("P-102/pump DE H", "overall velocity", "mm/s", "forecast",
                            "exponential", "", None, "2026-12-14",
                            ("2026-12-07", "2026-12-28"))
    return ReportData(
        title="Machine report P-102", plant="Demo Works",
        scope="Machine P-102 — Raw-water pump 2", generated_at="2026-11-16T09:30:00+00:00",
        status=rows, trends=[_trend()], spectra=[_envelope(rng), _velocity(rng)],
        findings=[finding], forecasts=[forecast], cautions=list(CAUTIONS),
        notes=notes if notes is not None else [
            "ISO zone limits are generic (ISO 20816-3, group 2, rigid foundation)."])


def _flat(text: str) -> str:
    return " ".join(text.split())


class StrictParser(HTMLParser):
    """Collects text and tables, and fails on any end tag that does not close the
    element opened last (void elements excepted)."""

    VOID = {"meta", "br", "hr", "img", "input", "link"}

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.text: list[str] = []
        self.tags: list[str] = []
        self.ids: list[str] = []
        self.refs: list[str] = []
        self.rows: list[list[str]] = []
        self.swatches: list[str] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        a = dict(attrs)
        if "id" in a:
            self.ids.append(a["id"])
        for v in a.values():
            self.refs += re.findall(r"^#(.+)$|url\(#([^)]+)\)", v or "")
        if tag == "span" and a.get("class") == "swatch":
            self.swatches.append(a.get("style", ""))
        if tag == "tr":
            self.rows.append([])
        if tag in ("td", "th"):
            self._cell = []
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append(tag)
        a = dict(attrs)
        if "id" in a:
            self.ids.append(a["id"])
        for v in a.values():
            self.refs += re.findall(r"^#(.+)$|url\(#([^)]+)\)", v or "")

    def handle_endtag(self, tag):
        if tag in self.VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append(_flat("".join(self._cell)))
            self._cell = None

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    rng = np.random.default_rng(12345)
    folder = tmp_path_factory.mktemp("report")
    data = demo_report(rng)
    pdf_calls: list[tuple[int, int, str]] = []
    pdf = render(data, folder / "p102.pdf", progress=lambda *a: pdf_calls.append(a))
    html = render(data, folder / "p102.html")
    return data, pdf, html, pdf_calls


def test_pdf_text_holds_machines_states_caution_and_finding(rendered):
    data, pdf, _, _ = rendered
    reader = PdfReader(pdf)
    pages = [p.extract_text() for p in reader.pages]
    text = _flat("\n".join(pages))
    # The status table: each point's row reads machine, point, state, zone, overall.
    assert re.search(r"P-101 — Raw-water pump 1\s+motor DE H\s+ok\s+A\s+1\.21", text), text
    assert re.search(r"P-102 — Raw-water pump 2\s+pump DE H\s+alert\s+C\s+3\.42", text)
    for caution in CAUTIONS:
        assert caution in text
    assert FINDING_TITLE in text
    assert "Recommendation" in text and "plan a bearing inspection" in text
    assert "BPFO 107.8 Hz" in text        # marker caption: 4.37 × 1480/60 Hz
    assert "Forecast: forecast, exponential model" in text
    assert "2026-12-14 (2026-12-07 – 2026-12-28)" in text   # danger date with interval
    # Sections in the contract's order.
    order = [text.index(h) for key, h in SECTIONS if key != "title"]
    assert order == sorted(order)
    # Title block, cautions and status on page 1, one page of trend and forecast,
    # two spectra, findings and notes: 3 to 5 A4 pages.
    n = len(reader.pages)
    assert 3 <= n <= 5, n
    for i, page in enumerate(pages, start=1):
        assert "Demo Works" in page and f"Page {i} of {n}" in page
    box = reader.pages[0].mediabox
    # A4 is 210 × 297 mm (ISO 216) = 595.3 × 841.9 pt at 72 pt per inch, 25.4 mm per inch.
    assert float(box.width) == pytest.approx(595.28, abs=0.5)
    assert float(box.height) == pytest.approx(841.89, abs=0.5)


def test_pdf_state_cells_carry_the_state_colours(rendered):
    _, pdf, _, _ = rendered
    content = PdfReader(pdf).pages[0].get_contents().get_data().decode("latin-1")
    # PDF fill colours are "r g b rg" with components 0–1 (ISO 32000-1, 8.6.8).
    fills = {tuple(round(float(c) * 255) for c in m)
             for m in re.findall(r"([\d.]+) ([\d.]+) ([\d.]+) rg", content)}
    for state in ("ok", "alert"):
        h = STATE_COLOURS[state]
        assert tuple(int(h[i:i + 2], 16) for i in (1, 3, 5)) in fills, state


def test_progress_reports_each_section_then_the_file(rendered):
    _, _, _, calls = rendered
    total = len(SECTIONS) + 1
    assert [c[0] for c in calls] == list(range(1, total + 1))
    assert {c[1] for c in calls} == {total}
    assert calls[-1][2] == "PDF written"


def test_html_parses_cleanly_and_holds_the_same_items(rendered):
    data, _, html_path, _ = rendered
    source = html_path.read_text(encoding="utf-8")
    parser = StrictParser()
    parser.feed(source)
    parser.close()
    assert parser.errors == [] and parser.stack == []
    text = _flat(" ".join(parser.text))
    for caution in CAUTIONS:
        assert caution in text
    assert FINDING_TITLE in text and "Demo Works" in text
    status = [r for r in parser.rows if r and r[0].startswith(("P-101", "P-102"))]
    assert status[0][:5] == ["P-101 — Raw-water pump 1", "motor DE H", "ok", "A", "1.21"]
    assert status[1][:5] == ["P-102 — Raw-water pump 2", "pump DE H", "alert", "C", "3.42"]
    # State by word and by colour: the swatches carry the palette's colours, in order.
    assert parser.swatches[:2] == [f"background-color:{STATE_COLOURS['ok']}",
                                   f"background-color:{STATE_COLOURS['alert']}"]
    # One inline SVG per plot, nothing fetched from elsewhere.
    assert parser.tags.count("svg") == len(data.trends) + len(data.spectra)
    assert "<script" not in source and "<link" not in source and "src=" not in source
    assert not re.search(r'href="(?!#)', source)
    # Several SVGs in one page: ids unique and every #reference resolves.
    assert len(parser.ids) == len(set(parser.ids))
    refs = {a or b for a, b in parser.refs}
    assert refs and refs <= set(parser.ids)


def test_long_status_table_flows_onto_more_pages(tmp_path, rng):
    rows = [StatusRow(f"M-{i:03d}", "Invented machine with a long descriptive name",
                      "motor NDE V", ("ok", "alert", "danger", "no data", "bad data")[i % 5],
                      "ABCD"[i % 4] if i % 5 < 3 else "", 1.0 + 0.01 * i if i % 5 < 3
                      else math.nan, "2026-11-16", "overall velocity")
            for i in range(150)]
    path = render_pdf(demo_report(rng, status=rows), tmp_path / "survey.pdf")
    reader = PdfReader(path)
    pages = [p.extract_text() for p in reader.pages]
    text = _flat("\n".join(pages))
    assert all(f"M-{i:03d}" in text for i in range(150))
    table_pages = [p for p in pages if "M-" in p]
    assert len(table_pages) >= 3
    # The heading row is repeated on every page the table runs onto.
    assert all("Worst band" in p for p in table_pages)
    assert len(reader.pages) >= 6


def test_body_text_stays_above_the_footer(rendered):
    _, pdf, _, _ = rendered
    reader = PdfReader(pdf)
    for page in reader.pages:
        ys: list[tuple[float, str]] = []

        def visit(text, cm, tm, font, size, ys=ys):
            if text.strip():
                ys.append((tm[5] * cm[3] + cm[5], text.strip()))
        page.extract_text(visitor_text=visit)
        body = [(y, t) for y, t in ys if not t.startswith(("Page ", "Demo Works"))]
        # Bottom margin 0.95 in = 68.4 pt; a text's top sits on it, its baseline a
        # line lower (9 pt text, 1 pt = 1/72 in).
        assert body and min(y for y, _ in body) > 68.4 - 12, min(body)
        footer = [y for y, t in ys if t.startswith("Page ")]
        assert len(footer) == 1 and footer[0] < 60


@pytest.mark.parametrize("renderer,suffix", [(render_pdf, ".pdf"), (render_html, ".html")])
def test_cancel_mid_way_leaves_no_file(tmp_path, rng, renderer, suffix):
    calls = []

    def cancel():
        return len(calls) >= 3  # after the status section

    target = tmp_path / f"report{suffix}"
    with pytest.raises(ReportCancelled, match="cancelled"):
        renderer(demo_report(rng), target, progress=lambda *a: calls.append(a),
                 cancel=cancel)
    assert len(calls) == 3
    assert list(tmp_path.iterdir()) == []


def test_cancel_keeps_an_older_report_as_it_was(tmp_path, rng):
    target = tmp_path / "report.pdf"
    target.write_bytes(b"older report")
    stop = threading.Event()
    stop.set()
    with pytest.raises(ReportCancelled):
        render(demo_report(rng), target, cancel=stop)
    assert target.read_bytes() == b"older report"
    assert [p.name for p in tmp_path.iterdir()] == ["report.pdf"]


def test_bad_suffix_and_missing_folder_raise_input_error(tmp_path, rng):
    data = demo_report(rng)
    bad = tmp_path / "report.docx"
    with pytest.raises(InputError, match=re.escape(str(bad))):
        render(data, bad)
    with pytest.raises(InputError, match=re.escape(str(tmp_path / "r.html"))):
        render_pdf(data, tmp_path / "r.html")
    missing = tmp_path / "no such folder" / "r.pdf"
    with pytest.raises(InputError, match="does not exist"):
        render(data, missing)
    assert list(tmp_path.iterdir()) == []


def test_malformed_data_names_the_field(tmp_path, rng):
    data = demo_report(rng)
    data.trends[0].values = data.trends[0].values[:-1]
    with pytest.raises(InputError, match=r"trends\[0\].*16 times_s but 15 values"):
        render(data, tmp_path / "r.pdf")
    data = demo_report(rng)
    data.status[1].state = "amber"
    with pytest.raises(InputError, match=r"status\[1\].*state.*'amber'"):
        render(data, tmp_path / "r.html")
    assert list(tmp_path.iterdir()) == []


def test_text_is_escaped_in_html_and_literal_in_pdf(tmp_path, rng):
    note = "Spare <script>alert(1)</script> & bearing costs $5 per $10 of downtime."
    data = demo_report(rng, notes=[note])
    html_path = render(data, tmp_path / "r.html")
    parser = StrictParser()
    parser.feed(html_path.read_text(encoding="utf-8"))
    assert "script" not in parser.tags and parser.errors == []
    assert note in _flat(" ".join(parser.text))
    pdf = render(data, tmp_path / "r.pdf")
    # "$...$" would be mathematics to matplotlib; the report draws it as typed.
    assert note in _flat(" ".join(p.extract_text() for p in PdfReader(pdf).pages))


def test_state_colours_come_from_the_okabe_ito_set():
    # Okabe & Ito (2008), Color Universal Design, J*FLY: the eight colours as published
    # RGB triples (from memory).
    okabe_ito = {(0, 0, 0), (230, 159, 0), (86, 180, 233), (0, 158, 115), (240, 228, 66),
                 (0, 114, 178), (213, 94, 0), (204, 121, 167)}

    def rgb(h):
        return tuple(int(h[i:i + 2], 16) for i in (1, 3, 5))
    for state in ("ok", "alert", "danger", "bad data"):
        assert rgb(STATE_COLOURS[state]) in okabe_ito, state
    assert set(STATE_COLOURS) == {"ok", "alert", "danger", "no data", "bad data"}
    assert len(set(STATE_COLOURS.values())) == 5


def test_peak_decimate_keeps_every_extreme(rng):
    x = np.arange(100_000, dtype=float)
    y = rng.random(x.size)
    y[[17, 40_000, 99_999]] = [5.0, 7.0, 6.0]
    xd, yd = peak_decimate(x, y, 2000)
    assert xd.size <= 2000 and np.all(np.diff(xd) > 0)
    # Reference: numpy's max/min of the full array, and the three planted peaks.
    assert yd.max() == y.max() and yd.min() == y.min()
    assert {17.0, 40_000.0, 99_999.0} <= set(xd)
    # Every bucket's maximum survives (numpy reduction over the same buckets).
    size = math.ceil(x.size / 1000)
    for b in range(0, x.size, size * 97):
        assert y[b:b + size].max() in yd


def test_forecast_dates_may_be_iso_strings(tmp_path, rng):
    data = demo_report(rng)
    fc = data.trends[0].forecast
    fc["curve_t_s"] = [(START + timedelta(weeks=15 + k)).isoformat() for k in range(9)]
    path = render(data, tmp_path / "r.html")
    assert path.stat().st_size > 10_000


def test_marker_labels_never_overlap_in_a_row():
    # 1000 Hz over 420 pt: a rotated label 8.45 pt wide covers about 20 Hz.
    freqs = [24.7, 49.4, 74.2, 86.9, 100.0, 111.6, 112.0, 112.4, 500.0]
    places = place_marker_labels(freqs, 0.0, 1000.0, 420.0)
    w = 6.5 * 1.3 * 1000.0 / 420.0
    spans: dict[int, list[tuple[float, float]]] = {0: [], 1: []}
    for f, p in zip(freqs, places):
        if p is not None:
            spans[p[0]].append((f - w, f) if p[1] == "left" else (f, f + w))
    for row in spans.values():
        row.sort()
        assert all(a[1] <= b[0] + 1e-9 for a, b in zip(row, row[1:]))
    # Well-spaced markers all get the first place; crowded ones spill over or go.
    assert places[:3] == [(0, "left")] * 3 and places[-1] == (0, "left")
    assert places[3] == (0, "right") and None in places


def test_two_reports_render_at_once_in_threads(tmp_path, rng):
    # The GUI renders off its own thread; two renders at once must not mix.
    data_a = demo_report(np.random.default_rng(1))
    data_b = demo_report(np.random.default_rng(2), notes=["Second report."])
    errors: list[BaseException] = []

    def work(data, name):
        try:
            render(data, tmp_path / f"{name}.pdf")
            render(data, tmp_path / f"{name}.html")
        except BaseException as exc:  # reported to the test below
            errors.append(exc)
    threads = [threading.Thread(target=work, args=a) for a in ((data_a, "a"), (data_b, "b"))]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    text_b = _flat(" ".join(p.extract_text() for p in PdfReader(tmp_path / "b.pdf").pages))
    text_a = _flat(" ".join(p.extract_text() for p in PdfReader(tmp_path / "a.pdf").pages))
    assert "Second report." in text_b and "Second report." not in text_a


def test_report_imports_neither_qt_nor_pyplot():
    code = ("import sys, engine.report; "
            "print('PySide6' in sys.modules, 'matplotlib.pyplot' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["False", "False"]


def test_empty_sections_say_so_and_cautions_are_never_left_out(tmp_path):
    data = ReportData(title="Survey of 2026-11-16", plant="Demo Works",
                      scope="Survey of 2026-11-16", generated_at="2026-11-16T12:00:00+00:00",
                      status=[], trends=[], spectra=[], findings=[], forecasts=[],
                      cautions=[])
    pdf_text = _flat(" ".join(p.extract_text() for p in
                              PdfReader(render(data, tmp_path / "s.pdf")).pages))
    parser = StrictParser()
    parser.feed((render(data, tmp_path / "s.html")).read_text(encoding="utf-8"))
    html_text = _flat(" ".join(parser.text))
    for text in (pdf_text, html_text):
        assert all(c in text for c in CAUTIONS)
        for sentence in ("No points in this report.", "No trends in this report.",
                         "No spectrum in this report carries a finding.",
                         "No findings in this report.", "No notes."):
            assert sentence in text
