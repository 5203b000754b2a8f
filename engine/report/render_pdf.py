"""The report as a PDF: A4 portrait pages of text, tables and plots.

Pages are matplotlib Figures laid out by :class:`~engine.report.layout.PageFlow` and
written with :class:`~matplotlib.backends.backend_pdf.PdfPages`; text is figure text in
the default font, so it can be searched and copied from the PDF.
"""

from __future__ import annotations

from pathlib import Path

from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure

from . import CAUTIONS
from .content import (EMPTY, FORECAST_COLUMNS, HEADINGS, SECTIONS, STATUS_COLUMNS,
                      STATUS_STATE_COLUMN, finding_heading, finding_meta, footer_text,
                      forecast_cells, spectrum_caption, status_cells, title_lines,
                      trend_caption)
from .data import ReportData, validate_report
from .layout import PageFlow
from .output import Job, atomic_file, check_target
from .plots import draw_spectrum, draw_trend, plot_axes, state_colour

TREND_PLOT_IN = 2.7      # height of a trend plot, inches
SPECTRUM_PLOT_IN = 3.0   # height of a spectrum plot, inches
CAPTION_PT = 7.5
TABLE_PT = 7.5


def _title(flow: PageFlow, data: ReportData) -> None:
    flow.heading(data.title, level=0, keep_in=0.0)
    for label, text in title_lines(data):
        flow.labelled(label, text)


def _cautions(flow: PageFlow, data: ReportData) -> None:
    flow.heading(HEADINGS["cautions"], keep_in=0.4)
    for sentence in data.cautions or CAUTIONS:
        flow.paragraph(sentence, bullet="\u2022")


def _status(flow: PageFlow, data: ReportData) -> None:
    flow.heading(HEADINGS["status"])
    if not data.status:
        flow.paragraph(EMPTY["status"])
        return
    flow.table(STATUS_COLUMNS, [status_cells(r) for r in data.status],
               swatches=[{STATUS_STATE_COLUMN: state_colour(r.state)} for r in data.status],
               size=TABLE_PT)


def _captioned_plot(flow: PageFlow, height_in: float, captions: list[str]):
    """Reserve a plot and its caption on one page; return the plot's axes."""
    caption_h = sum(flow.paragraph_height(c, CAPTION_PT, after_in=0.02) for c in captions)
    flow.ensure(height_in + caption_h)
    fig, rect = flow.block(height_in)
    ax = plot_axes(fig, rect)
    for c in captions:
        flow.paragraph(c, CAPTION_PT, colour="#333333", after_in=0.02)
    flow.gap(0.14)
    return ax


def _trends(flow: PageFlow, data: ReportData, job: Job) -> None:
    flow.heading(HEADINGS["trends"], keep_in=TREND_PLOT_IN)
    if not data.trends:
        flow.paragraph(EMPTY["trends"])
    for tr in data.trends:
        draw_trend(_captioned_plot(flow, TREND_PLOT_IN, trend_caption(tr)), tr)
        job.check()


def _forecasts(flow: PageFlow, data: ReportData) -> None:
    flow.heading(HEADINGS["forecasts"])
    if not data.forecasts:
        flow.paragraph(EMPTY["forecasts"])
        return
    flow.table(FORECAST_COLUMNS, [forecast_cells(f) for f in data.forecasts], size=TABLE_PT)


def _spectra(flow: PageFlow, data: ReportData, job: Job) -> None:
    flow.heading(HEADINGS["spectra"], keep_in=SPECTRUM_PLOT_IN)
    if not data.spectra:
        flow.paragraph(EMPTY["spectra"])
    for sp in data.spectra:
        draw_spectrum(_captioned_plot(flow, SPECTRUM_PLOT_IN, spectrum_caption(sp)), sp)
        job.check()


def _findings(flow: PageFlow, data: ReportData) -> None:
    flow.heading(HEADINGS["findings"])
    if not data.findings:
        flow.paragraph(EMPTY["findings"])
    for item in data.findings:
        flow.heading(finding_heading(item.machine, item.point, item.title), level=2,
                     keep_in=0.5)
        flow.paragraph(finding_meta(item.severity, item.run_id, item.taken), 8.0,
                       italic=True, colour="#333333")
        if item.evidence:
            flow.paragraph("Evidence", 8.5, bold=True, after_in=0.01)
            for ev in item.evidence:
                flow.paragraph(ev, 8.5, indent_in=0.1, bullet="\u2013", after_in=0.01)
        flow.paragraph("Recommendation", 8.5, bold=True, after_in=0.01)
        flow.paragraph(item.recommendation, 8.5, indent_in=0.1, after_in=0.08)


def _notes(flow: PageFlow, data: ReportData) -> None:
    flow.heading(HEADINGS["notes"], keep_in=0.3)
    if not data.notes:
        flow.paragraph(EMPTY["notes"])
    for note in data.notes:
        flow.paragraph(note, bullet="\u2022")


def build_pages(data: ReportData, job: Job | None = None) -> list[Figure]:
    """The report's pages as A4 Figures, footers written.

    Parameters
    ----------
    data : ReportData
        Already validated (:func:`~engine.report.data.validate_report`).
    job : Job, optional
        Progress and cancel; one step per section of :data:`~engine.report.content.SECTIONS`.

    Returns
    -------
    list of Figure
        One per page; render each with a PDF or Agg canvas.
    """
    job = job or Job(Path("report"), len(SECTIONS), None, None)
    flow = PageFlow(footer_text(data))
    work = {
        "title": lambda: _title(flow, data),
        "cautions": lambda: _cautions(flow, data),
        "status": lambda: _status(flow, data),
        "trends": lambda: _trends(flow, data, job),
        "forecasts": lambda: _forecasts(flow, data),
        "spectra": lambda: _spectra(flow, data, job),
        "findings": lambda: _findings(flow, data),
        "notes": lambda: _notes(flow, data),
    }
    for key, heading in SECTIONS:
        work[key]()
        job.step(heading)
    return flow.finish()


def render_pdf(data: ReportData, path, *, progress=None, cancel=None) -> Path:
    """Write the report as a PDF file.

    Parameters
    ----------
    data : ReportData
    path : str or os.PathLike
        Target, ending ``.pdf``; its folder must exist.  An existing file is replaced
        only when the new report is complete.
    progress : callable(done, total, text), optional, keyword-only
        Called after each section and once the file is written (``done == total``).
    cancel : callable returning bool, or object with ``is_set()``, optional
        Checked before each section, each plot and each page written.

    Returns
    -------
    pathlib.Path
        ``path``.

    Raises
    ------
    InputError
        Wrong suffix, missing folder, or malformed data (message names path or field).
    ReportCancelled
        When cancelled; the partial file is deleted.
    """
    target = check_target(path, ".pdf")
    validate_report(data)
    job = Job(target, len(SECTIONS) + 1, progress, cancel)
    job.check()
    with atomic_file(target) as tmp:
        pages = build_pages(data, job)
        metadata = {"Title": data.title, "Subject": f"{data.plant} \u2014 {data.scope}",
                    "Creator": "Shaftwatch"}
        with PdfPages(tmp, metadata=metadata) as pdf:
            for fig in pages:
                job.check()
                pdf.savefig(fig)
    job.finish("PDF written")
    return target
