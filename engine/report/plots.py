"""The report's plots, drawn on plain matplotlib Figures (no pyplot, no GUI backend).

One drawing function per kind of plot (:func:`draw_trend`, :func:`draw_spectrum`)
works on any :class:`~matplotlib.axes.Axes`: the PDF places the axes on an A4 page,
the HTML draws them on a figure of their own and inlines it as SVG
(:func:`figure_svg`).

Colours
-------
Every colour comes from the Okabe–Ito set of eight colours that stay distinct for the
common forms of colour-blindness ([1]_), except the neutral grey of "no data", which is
ours on purpose: the absence of a measurement should not look like any state.  States
are always shown by word as well, so colour only helps.

References
----------
.. [1] M. Okabe, K. Ito, "Color Universal Design (CUD) — How to make figures and
   presentations that are friendly to colorblind people", J*FLY, 2008
   (https://jfly.uni-koeln.de/color/).
"""

from __future__ import annotations

import io
import math
import re

import matplotlib.dates as mdates
import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.textpath import TextToPath
from matplotlib.transforms import blended_transform_factory

from .content import MISSING, number, trend_title
from .data import SpectrumPlot, TrendSeries, forecast_curve

#: The Okabe–Ito colours by their published names, sRGB hex (Okabe & Ito 2008).
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9",
    "bluish green": "#009E73", "yellow": "#F0E442", "blue": "#0072B2",
    "vermillion": "#D55E00", "reddish purple": "#CC79A7",
}

#: Colour of each point state (word shown beside it everywhere).  Chosen from the
#: Okabe–Ito colour-blind-safe set (Okabe & Ito 2008): bluish green for ok, orange for
#: alert and vermillion for danger — the warmer, the more urgent, and orange and
#: vermillion differ in lightness too; reddish purple for bad data (a sensor or file
#: problem, not a machine state); a neutral grey of our own for no data.
STATE_COLOURS: dict[str, str] = {
    "ok": OKABE_ITO["bluish green"],
    "alert": OKABE_ITO["orange"],
    "danger": OKABE_ITO["vermillion"],
    "bad data": OKABE_ITO["reddish purple"],
    "no data": "#BBBBBB",
}

#: Colours of plot elements, all Okabe–Ito.  The alert and danger lines share the
#: colours of the alert and danger states, and differ in line style as well.
PLOT_COLOURS: dict[str, str] = {
    "data": OKABE_ITO["blue"],
    "forecast": OKABE_ITO["black"],
    "interval": OKABE_ITO["sky blue"],
    "alert": STATE_COLOURS["alert"],
    "danger": STATE_COLOURS["danger"],
    "marker": OKABE_ITO["reddish purple"],
    "band": OKABE_ITO["yellow"],
}
GRID = "#DDDDDD"
#: Most points a spectrum line is drawn with; longer spectra keep each bucket's
#: minimum and maximum (:func:`peak_decimate`), so no peak is lost.
MAX_PLOT_POINTS = 4000
#: Size of the marker labels on spectra, points.
MARKER_LABEL_PT = 6.5


def state_colour(state: str) -> str:
    """The colour of a state (grey for an unknown word)."""
    return STATE_COLOURS.get(state, STATE_COLOURS["no data"])


def peak_decimate(x: np.ndarray, y: np.ndarray, max_points: int = MAX_PLOT_POINTS
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Fewer points for drawing, keeping the minimum and maximum of each bucket.

    Parameters
    ----------
    x, y : 1-D arrays of equal length
        For example frequency (Hz) and amplitude.
    max_points : int
        At most this many points are returned (at least 2).

    Returns
    -------
    x, y : 1-D arrays
        Unchanged when short enough; otherwise, in their original order, the points
        holding each bucket's smallest and largest ``y`` — so the drawn line reaches
        every peak and every trough.  NaN values are kept only where a bucket has
        nothing else.
    """
    n = y.size
    if n <= max_points:
        return x, y
    k = max(1, max_points // 2)
    size = math.ceil(n / k)
    finite = np.isfinite(y)
    pad = size * k - n
    hi = np.concatenate([np.where(finite, y, -np.inf), np.full(pad, -np.inf)]).reshape(k, size)
    lo = np.concatenate([np.where(finite, y, np.inf), np.full(pad, np.inf)]).reshape(k, size)
    base = np.arange(k) * size
    idx = np.unique(np.concatenate([base + hi.argmax(axis=1), base + lo.argmin(axis=1)]))
    idx = idx[idx < n]
    return x[idx], y[idx]


def _dates(t_s: np.ndarray) -> np.ndarray:
    """POSIX seconds as numpy datetime64 (UTC, microseconds) for matplotlib's date axis."""
    return (np.asarray(t_s, dtype=float) * 1e6).round().astype("int64").astype("datetime64[us]")


def plot_axes(fig: Figure, rect_in: tuple[float, float, float, float], *,
              left_in: float = 0.7, bottom_in: float = 0.45, top_in: float = 0.3,
              right_in: float = 0.15) -> Axes:
    """Axes inside a block of a figure, leaving room for tick labels and the title.

    Parameters
    ----------
    fig : Figure
    rect_in : (left, bottom, width, height)
        The block, inches from the figure's lower-left corner.
    left_in, bottom_in, top_in, right_in : float
        Room inside the block for the y labels, the x labels, the title and the edge,
        inches.
    """
    fw, fh = fig.get_size_inches()
    x, y, w, h = rect_in
    ax = fig.add_axes(((x + left_in) / fw, (y + bottom_in) / fh,
                       (w - left_in - right_in) / fw, (h - bottom_in - top_in) / fh))
    # Drawn after the page's own text (zorder 3), so that a PDF reader extracts the
    # headings and captions in reading order before the plots' tick labels.
    ax.set_zorder(4)
    return ax


def _style(ax: Axes, title: str, xlabel: str, ylabel: str) -> None:
    ax.set_title(title, loc="left", fontsize=8.5, fontweight="bold", parse_math=False)
    ax.set_xlabel(xlabel, fontsize=7.5, parse_math=False)
    ax.set_ylabel(ylabel, fontsize=7.5, parse_math=False)
    ax.tick_params(labelsize=7)
    ax.grid(True, color=GRID, linewidth=0.5)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def draw_trend(ax: Axes, trend: TrendSeries) -> None:
    """A value against date: the runs, the alert and danger lines, the forecast.

    The forecast's curve is dashed and its interval shaded; the alert line is dashed
    and the danger line solid, each labelled in the legend with its level.
    """
    _style(ax, trend_title(trend), "Date (UTC)", trend.unit)
    ok = np.isfinite(trend.times_s) & np.isfinite(trend.values)
    t, v = trend.times_s[ok], trend.values[ok]
    if t.size:
        ax.plot(_dates(t), v, color=PLOT_COLOURS["data"], marker="o", markersize=3,
                linewidth=1.2, label=trend.value)
    else:
        ax.text(0.5, 0.5, "no runs", transform=ax.transAxes, ha="center", va="center",
                fontsize=8, color="#555555")
    levels = [x for x in (trend.alert, trend.danger) if x is not None and math.isfinite(x)]
    known = [float(x) for x in v] + levels
    # An exponential forecast (or its interval) can run far above danger; the view
    # stops at 1.5 times the highest run or level, and the time axis where the curve
    # leaves the view, so the runs are not squeezed into a corner.
    cap = 1.5 * max(known) if known and max(known) > 0 else math.inf
    tops = list(known)
    t_cut = math.nan
    curve = forecast_curve(trend.forecast) if trend.forecast else None
    if curve is not None:
        tc, vc, lo, hi = curve
        good = np.isfinite(tc) & np.isfinite(vc)
        if good.any():
            tc, vc, lo, hi = tc[good], vc[good], lo[good], hi[good]
            dc = _dates(tc)
            ax.fill_between(dc, lo, hi, color=PLOT_COLOURS["interval"], alpha=0.35,
                            linewidth=0, label="forecast interval")
            ax.plot(dc, vc, color=PLOT_COLOURS["forecast"], linestyle="--", linewidth=1.1,
                    label="forecast")
            tops.append(min(float(vc.max()), cap))
            above = vc > cap
            if above.any() and t.size:
                t_cut = float(tc[int(np.argmax(above))])
    for level, key, style in ((trend.alert, "alert", "--"), (trend.danger, "danger", "-")):
        if level is not None and math.isfinite(level):
            ax.axhline(level, color=PLOT_COLOURS[key], linestyle=style, linewidth=1.2,
                       label=f"{key} {number(level)} {trend.unit}")
    if tops:
        top = max(tops)
        ax.set_ylim(min(0.0, min(tops)), top * 1.1 if top > 0 else 1.0)
    if math.isfinite(t_cut):
        ax.set_xlim(right=_dates(np.array([t_cut + 0.05 * (t_cut - float(t[0]))]))[0])
    locator = mdates.AutoDateLocator(minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
    ax.xaxis.get_offset_text().set_fontsize(7)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=6.5, loc="upper left", frameon=True, framealpha=0.85,
                  edgecolor="none")


def draw_spectrum(ax: Axes, spec: SpectrumPlot) -> None:
    """A spectrum or envelope spectrum with its alarm bands shaded and the matched
    sources marked by labelled vertical lines.

    Labels that would overlap a neighbour's are left off the plot (the caption lists
    every marker with its frequency).
    """
    ylabel = ("Envelope amplitude" if spec.kind == "envelope" else "Amplitude") + \
        f" ({spec.unit})"
    _style(ax, spec.title, "Frequency (Hz)", ylabel)
    f, a = peak_decimate(spec.frequency_hz, spec.amplitude)
    ok = np.isfinite(f) & np.isfinite(a)
    f, a = f[ok], a[ok]
    if f.size == 0:
        ax.text(0.5, 0.5, f"no lines {MISSING} nothing to draw", transform=ax.transAxes,
                ha="center", va="center", fontsize=8, color="#555555")
        return
    x0, x1 = float(min(f[0], 0.0)), float(f[-1])
    x1 = x1 if x1 > x0 else x0 + 1.0
    ax.set_xlim(x0, x1)
    mixed = blended_transform_factory(ax.transData, ax.transAxes)
    for lo, hi, _alert, _danger, name in spec.bands:
        ax.axvspan(lo, hi, color=PLOT_COLOURS["band"], alpha=0.3, linewidth=0)
        ax.text(max(lo, x0), 0.02, f" {name}", transform=mixed, fontsize=6, ha="left",
                va="bottom", color="#333333", clip_on=True, parse_math=False,
                bbox={"facecolor": "white", "alpha": 0.7, "edgecolor": "none", "pad": 0.5})
    ax.plot(f, a, color=PLOT_COLOURS["data"], linewidth=0.7)
    # Marker labels stand above the highest line: the y range leaves room for them.
    markers = sorted((float(m), str(label)) for m, label in spec.markers if x0 <= m <= x1)
    fw, fh = ax.figure.get_size_inches()
    pos = ax.get_position()
    width_pt, height_pt = pos.width * fw * 72.0, pos.height * fh * 72.0
    measure = TextToPath()
    prop = FontProperties(size=MARKER_LABEL_PT)
    lengths = [measure.get_text_width_height_descent(label, prop, ismath=False)[0] + 2.0
               for _, label in markers]
    places = place_marker_labels([m for m, _ in markers], x0, x1, width_pt)
    row_len = [max([ln for ln, p in zip(lengths, places) if p and p[0] == r], default=0.0)
               for r in range(2)]
    row_top = [0.985, 0.985 - (row_len[0] + 3.0) / height_pt]
    band = (row_len[0] + (row_len[1] + 3.0 if row_len[1] else 0.0) + 4.0) / height_pt
    amax = float(a.max())
    room = 1.0 - min(max(band, 0.25), 0.6)
    ax.set_ylim(min(0.0, float(a.min())), amax / room if amax > 0 else 1.0)
    for (freq, label), place in zip(markers, places):
        ax.axvline(freq, color=PLOT_COLOURS["marker"], linestyle=":", linewidth=1.0)
        if place is None:
            continue  # no room beside its neighbours; the caption lists it
        row, side = place
        ax.text(freq, row_top[row], label, transform=mixed, rotation=90,
                fontsize=MARKER_LABEL_PT, ha="right" if side == "left" else "left",
                va="top", color="#222222", parse_math=False,
                bbox={"facecolor": "white", "alpha": 0.8, "edgecolor": "none", "pad": 0.3})


def place_marker_labels(freqs_hz: list[float], x0: float, x1: float, width_pt: float, *,
                        line_pt: float = MARKER_LABEL_PT * 1.3, rows: int = 2
                        ) -> list[tuple[int, str] | None]:
    """Where each vertical marker label goes: ``(row, "left" | "right")`` or None.

    Labels are rotated 90°, so each needs about one line height of width beside its
    marker.  Going up in frequency, a label takes the first free place among: top
    row left of its line, top row right of it, then the same in the lower rows.  A
    label with no free place is left off (the caption lists every marker).

    Parameters
    ----------
    freqs_hz : list of float
        Marker frequencies, ascending, Hz.
    x0, x1 : float
        The x range of the axes, Hz.
    width_pt : float
        Width of the axes, points.
    line_pt : float
        Width a rotated label takes, points.
    rows : int
        Rows of labels.
    """
    w = line_pt * (x1 - x0) / max(width_pt, 1.0)
    taken: list[list[tuple[float, float]]] = [[] for _ in range(rows)]
    out: list[tuple[int, str] | None] = []
    for f in freqs_hz:
        choice = None
        for r in range(rows):
            for side, (lo, hi) in (("left", (f - w, f)), ("right", (f, f + w))):
                if lo < x0 or hi > x1:
                    continue
                if all(hi <= a or lo >= b for a, b in taken[r]):
                    choice = (r, side)
                    taken[r].append((lo, hi))
                    break
            if choice:
                break
        out.append(choice)
    return out


def trend_figure(trend: TrendSeries, size_in: tuple[float, float] = (7.2, 2.8)) -> Figure:
    """A figure of its own holding one trend plot (for SVG or PNG)."""
    fig = Figure(figsize=size_in)
    draw_trend(plot_axes(fig, (0.0, 0.0, *size_in)), trend)
    return fig


def spectrum_figure(spec: SpectrumPlot, size_in: tuple[float, float] = (7.2, 3.0)) -> Figure:
    """A figure of its own holding one spectrum plot (for SVG or PNG)."""
    fig = Figure(figsize=size_in)
    draw_spectrum(plot_axes(fig, (0.0, 0.0, *size_in)), spec)
    return fig


_ID = re.compile(r'\bid="([^"]+)"')
_REF = re.compile(r'#([A-Za-z_][\w.\-]*)(?=["\')])')


def figure_svg(fig: Figure, id_prefix: str) -> str:
    """The figure as an ``<svg>`` element for inlining in HTML.

    The XML declaration and DOCTYPE are dropped, and every ``id`` (with each
    ``#id`` reference to it) gets ``id_prefix`` so that several plots in one page
    never share an id.
    """
    buf = io.BytesIO()
    fig.savefig(buf, format="svg", metadata={"Date": None})
    text = buf.getvalue().decode("utf-8")
    text = text[text.index("<svg"):]
    ids = set(_ID.findall(text))
    text = _ID.sub(lambda m: f'id="{id_prefix}{m.group(1)}"', text)
    return _REF.sub(lambda m: f"#{id_prefix}{m.group(1)}" if m.group(1) in ids
                    else m.group(0), text)
