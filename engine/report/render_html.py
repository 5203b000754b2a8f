"""The report as one self-contained HTML file: inline SVG plots, a small stylesheet.

Nothing is fetched when the file is opened (no scripts, fonts or images from
elsewhere), so the file can be mailed or archived as it is.  Every piece of text from
the data is escaped with :func:`html.escape`.
"""

from __future__ import annotations

from html import escape
from pathlib import Path

from . import CAUTIONS
from .content import (EMPTY, FORECAST_COLUMNS, HEADINGS, SECTIONS, STATUS_COLUMNS,
                      STATUS_STATE_COLUMN, Column, finding_heading, finding_meta,
                      footer_text, forecast_cells, spectrum_caption, status_cells,
                      title_lines, trend_caption)
from .data import ReportData, validate_report
from .output import Job, atomic_file, check_target
from .plots import figure_svg, spectrum_figure, state_colour, trend_figure

#: Our stylesheet: one readable column, plain tables, plots as wide as the text.
STYLE = """
body { font-family: "DejaVu Sans", Verdana, Arial, sans-serif; color: #1a1a1a;
       max-width: 58rem; margin: 1.5rem auto; padding: 0 1rem; line-height: 1.4;
       font-size: 15px; }
h1 { font-size: 1.6rem; border-bottom: 2px solid #1a1a1a; padding-bottom: .2rem; }
h2 { font-size: 1.2rem; border-bottom: 1px solid #9a9a9a; margin-top: 2rem; }
h3 { font-size: 1rem; margin: 1.2rem 0 .2rem; }
dl.meta { display: grid; grid-template-columns: 7rem 1fr; gap: .1rem .6rem; }
dl.meta dt { font-weight: bold; }
dl.meta dd { margin: 0; }
table { border-collapse: collapse; width: 100%; font-size: .85rem; }
th { background: #e6e6e6; text-align: left; border-bottom: 2px solid #1a1a1a;
     padding: .25rem .4rem; }
td { border-bottom: 1px solid #cfcfcf; padding: .25rem .4rem; vertical-align: top; }
.num { text-align: right; font-variant-numeric: tabular-nums; }
.mid { text-align: center; }
.swatch { display: inline-block; width: .85em; height: .85em; margin-right: .35em;
          border: 1px solid #555; vertical-align: -.1em; }
figure { margin: 1rem 0 1.4rem; }
figure svg { width: 100%; height: auto; }
figcaption { font-size: .8rem; color: #333; }
figcaption p { margin: .1rem 0; }
p.meta-line { font-style: italic; color: #333; font-size: .85rem; margin: 0 0 .3rem; }
p.label { font-weight: bold; margin: .3rem 0 0; }
footer { margin-top: 2.5rem; border-top: 1px solid #9a9a9a; padding-top: .3rem;
         font-size: .8rem; color: #444; }
@media print { body { max-width: none; } figure, tr { break-inside: avoid; } }
""".strip()

_ALIGN = {"left": "", "right": ' class="num"', "center": ' class="mid"'}


def _table(columns: tuple[Column, ...], rows: list[list[str]],
           state_column: int | None = None) -> str:
    out = ["<table>", "<thead><tr>"]
    out += [f'<th scope="col"{_ALIGN[c.align]}>{escape(c.title)}</th>' for c in columns]
    out.append("</tr></thead><tbody>")
    for row in rows:
        cells = []
        for j, (col, text) in enumerate(zip(columns, row)):
            if j == state_column:
                swatch = (f'<span class="swatch" style="background-color:'
                          f'{escape(state_colour(text))}"></span>')
                cells.append(f"<td>{swatch}{escape(text)}</td>")
            else:
                cells.append(f"<td{_ALIGN[col.align]}>{escape(text)}</td>")
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "\n".join(out)


def _figure(svg: str, captions: list[str]) -> str:
    caps = "".join(f"<p>{escape(c)}</p>" for c in captions)
    return f"<figure>\n{svg}\n<figcaption>{caps}</figcaption>\n</figure>"


def _section(key: str, data: ReportData, job: Job) -> list[str]:
    """The HTML of one section."""
    h2 = f"<section>\n<h2>{escape(HEADINGS.get(key, ''))}</h2>"
    if key == "title":
        meta = "".join(f"<dt>{escape(k)}</dt><dd>{escape(v)}</dd>"
                       for k, v in title_lines(data))
        return [f"<header>\n<h1>{escape(data.title)}</h1>\n<dl class=\"meta\">{meta}</dl>\n"
                "</header>"]
    out = [h2]
    if key == "cautions":
        out.append("<ul>" + "".join(f"<li>{escape(c)}</li>"
                                    for c in (data.cautions or CAUTIONS)) + "</ul>")
    elif key == "status":
        out.append(_table(STATUS_COLUMNS, [status_cells(r) for r in data.status],
                          STATUS_STATE_COLUMN) if data.status else "")
    elif key == "trends":
        for n, tr in enumerate(data.trends):
            out.append(_figure(figure_svg(trend_figure(tr), f"t{n}-"), trend_caption(tr)))
            job.check()
    elif key == "forecasts":
        out.append(_table(FORECAST_COLUMNS, [forecast_cells(f) for f in data.forecasts])
                   if data.forecasts else "")
    elif key == "spectra":
        for n, sp in enumerate(data.spectra):
            out.append(_figure(figure_svg(spectrum_figure(sp), f"s{n}-"),
                               spectrum_caption(sp)))
            job.check()
    elif key == "findings":
        for item in data.findings:
            heading = finding_heading(item.machine, item.point, item.title)
            out.append(f"<article>\n<h3>{escape(heading)}</h3>")
            out.append(f'<p class="meta-line">'
                       f"{escape(finding_meta(item.severity, item.run_id, item.taken))}</p>")
            if item.evidence:
                out.append('<p class="label">Evidence</p><ul>'
                           + "".join(f"<li>{escape(e)}</li>" for e in item.evidence) + "</ul>")
            out.append(f'<p class="label">Recommendation</p>'
                       f"<p>{escape(item.recommendation)}</p>\n</article>")
    elif key == "notes":
        if data.notes:
            out.append("<ul>" + "".join(f"<li>{escape(n)}</li>" for n in data.notes) + "</ul>")
    empty = {"status": data.status, "trends": data.trends, "forecasts": data.forecasts,
             "spectra": data.spectra, "findings": data.findings, "notes": data.notes}
    if key in empty and not empty[key]:
        out.append(f"<p>{escape(EMPTY[key])}</p>")
    out.append("</section>")
    return [part for part in out if part]


def build_html(data: ReportData, job: Job | None = None) -> str:
    """The whole report as one HTML document (a string).

    Parameters
    ----------
    data : ReportData
        Already validated.
    job : Job, optional
        Progress and cancel; one step per section.
    """
    job = job or Job(Path("report"), len(SECTIONS), None, None)
    body: list[str] = []
    for key, heading in SECTIONS:
        body += _section(key, data, job)
        job.step(heading)
    return "\n".join([
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        '<meta name="generator" content="Shaftwatch">',
        f"<title>{escape(data.title)} \u2014 {escape(data.plant)}</title>",
        f"<style>\n{STYLE}\n</style>",
        "</head>",
        "<body>",
        "<main>",
        *body,
        "</main>",
        f"<footer>{escape(footer_text(data))}</footer>",
        "</body>",
        "</html>",
        "",
    ])


def render_html(data: ReportData, path, *, progress=None, cancel=None) -> Path:
    """Write the report as one self-contained HTML file (UTF-8, plots as inline SVG).

    Parameters
    ----------
    data : ReportData
    path : str or os.PathLike
        Target, ending ``.html``; its folder must exist.  An existing file is replaced
        only when the new report is complete.
    progress : callable(done, total, text), optional, keyword-only
        Called after each section and once the file is written (``done == total``).
    cancel : callable returning bool, or object with ``is_set()``, optional
        Checked before each section and each plot.

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
    target = check_target(path, ".html")
    validate_report(data)
    job = Job(target, len(SECTIONS) + 1, progress, cancel)
    job.check()
    with atomic_file(target) as tmp:
        tmp.write_text(build_html(data, job), encoding="utf-8")
    job.finish("HTML written")
    return target
