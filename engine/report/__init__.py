"""Reports for the maintenance planner: a PDF or HTML file per machine or per survey.

The report shows, in this order: a title block (plant, scope, time generated), the
cautions, the status table, the trend plots with alert and danger lines and forecast,
the forecast table, the spectra and envelope spectra that carry findings (matched
sources marked, alarm bands shaded), the findings with evidence and recommendations,
and the notes.  The caller fills a :class:`ReportData` (:mod:`engine.report.data`);
the renderers only read it.

Rendering uses matplotlib's :class:`~matplotlib.figure.Figure` with the PDF, Agg and
SVG backends directly (never pyplot, never a GUI backend), so it runs headless and off
the GUI thread.  Long reports call ``progress(done, total, text)`` per section and stop
when ``cancel`` (a callable returning True, or an object with ``is_set()``) says so:
the partial file is deleted and :class:`ReportCancelled` raised.  The output is
written to a temporary file in the target's folder and renamed over the target at the
end (``os.replace``), so a failed or cancelled report never leaves a half file and
never spoils an older report of the same name.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import EngineError, InputError


class ReportCancelled(EngineError):
    """The report was cancelled; no file was written (an older file is left as it was)."""


#: The cautions every report, the README and the about box show, as sentences.
CAUTIONS: list[str] = [
    "Vibration analysis supports maintenance decisions; it cannot prove that a machine "
    "is safe.",
    "Work on or near running machinery only under the site's own procedures, with "
    "guards in place, lock-out/tag-out and hearing protection.",
    "The ISO 20816 zone defaults are generic limits: the machine manufacturer's limits, "
    "the site's standards and local codes take precedence over them.",
    "Decisions to run or stop a machine rest with qualified, licensed personnel.",
]

# The renderers import ReportCancelled and CAUTIONS from this module, so they come after.
from .data import (  # noqa: E402
    FindingItem,
    ForecastItem,
    ReportData,
    SpectrumPlot,
    StatusRow,
    TrendSeries,
    validate_report,
)
from .render_html import render_html  # noqa: E402
from .render_pdf import render_pdf  # noqa: E402

#: Suffixes :func:`render` knows, and the renderer of each.
RENDERERS = {".pdf": render_pdf, ".html": render_html}


def render(data: ReportData, path, *, progress=None, cancel=None) -> Path:
    """Write a report, PDF or HTML by the suffix of ``path``.

    Parameters
    ----------
    data : ReportData
    path : str or os.PathLike
        Target file, ending ``.pdf`` or ``.html`` (any case).
    progress : callable(done, total, text), optional, keyword-only
        Called after each section.
    cancel : callable returning bool, or object with ``is_set()``, optional
        Checked between sections and plots; when true the report stops.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    InputError
        When the suffix is neither ``.pdf`` nor ``.html``, the folder does not exist,
        or the data are malformed; the message names the path or field.
    ReportCancelled
        When cancelled; no file is left behind.
    """
    target = Path(path)
    renderer = RENDERERS.get(target.suffix.lower())
    if renderer is None:
        raise InputError(f"{target}: a report must end .pdf or .html, got "
                         f"{target.suffix or 'no suffix'!r}")
    return renderer(data, target, progress=progress, cancel=cancel)


__all__ = [
    "CAUTIONS", "RENDERERS", "FindingItem", "ForecastItem", "ReportCancelled", "ReportData",
    "SpectrumPlot", "StatusRow", "TrendSeries", "render", "render_html", "render_pdf",
    "validate_report",
]
