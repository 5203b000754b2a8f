"""A4 portrait pages that headings, paragraphs, tables and plots flow down.

Every page is a matplotlib :class:`~matplotlib.figure.Figure` of A4 size; text is
placed as figure text (real, extractable text in the PDF), wrapped with widths measured
from the font itself (:class:`TextMeasure`), so nothing runs into the margin.  Tables
continue on the next page with their heading row repeated; headings stay with the
start of what follows them.  :meth:`PageFlow.finish` writes the footer (plant, title,
"Page i of n") on every page once the number of pages is known.

Positions are inches; ``y`` runs down from the top edge of the page.
"""

from __future__ import annotations

from matplotlib.figure import Figure
from matplotlib.font_manager import FontProperties
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from matplotlib.textpath import TextToPath

from .content import Column

#: A4 portrait, 210 mm × 297 mm (ISO 216), in inches (1 in = 25.4 mm).
PAGE_W_IN, PAGE_H_IN = 210.0 / 25.4, 297.0 / 25.4
MARGIN_LEFT_IN = MARGIN_RIGHT_IN = 0.8
MARGIN_TOP_IN = 0.75
MARGIN_BOTTOM_IN = 0.95
#: Baseline area of the footer, inches from the bottom edge.
FOOTER_Y_IN = 0.5
BODY_PT = 9.0
LEADING = 1.32           # line height / font size
TEXT_COLOUR = "#1A1A1A"
RULE_COLOUR = "#9A9A9A"
HEADER_FILL = "#E6E6E6"
CELL_PAD_IN = 0.045
MAX_CELL_LINES = 24      # a longer cell is cut with an ellipsis so a row fits a page


class TextMeasure:
    """Widths of text in the default font (DejaVu Sans), points, and line wrapping."""

    def __init__(self) -> None:
        self._ttp = TextToPath()
        self._cache: dict[tuple[str, float, bool], float] = {}

    def width_pt(self, text: str, size: float, bold: bool = False) -> float:
        """Advance width of ``text`` at ``size`` points, in points."""
        key = (text, size, bold)
        w = self._cache.get(key)
        if w is None:
            prop = FontProperties(size=size, weight="bold" if bold else "normal")
            w = self._ttp.get_text_width_height_descent(text, prop, ismath=False)[0]
            self._cache[key] = w
        return w

    def wrap(self, text: str, width_pt: float, size: float, bold: bool = False) -> list[str]:
        """``text`` cut into lines no wider than ``width_pt``, at spaces; a word wider
        than a line is cut between characters.  Newlines in ``text`` are kept."""
        limit = width_pt * 0.98  # a little room for rounding in the PDF's glyph widths
        space = self.width_pt(" ", size, bold)
        lines: list[str] = []
        for para in str(text).split("\n"):
            line, line_w = "", 0.0
            for word in para.split():
                w = self.width_pt(word, size, bold)
                while w > limit:  # a single word too wide for any line
                    if line:
                        lines.append(line)
                        line, line_w = "", 0.0
                    cut = len(word) - 1
                    while cut > 1 and self.width_pt(word[:cut], size, bold) > limit:
                        cut -= 1
                    lines.append(word[:cut])
                    word = word[cut:]
                    w = self.width_pt(word, size, bold)
                if line and line_w + space + w > limit:
                    lines.append(line)
                    line, line_w = "", 0.0
                line, line_w = (f"{line} {word}", line_w + space + w) if line else (word, w)
            lines.append(line)
        return lines

    def fit(self, text: str, width_pt: float, size: float, bold: bool = False) -> str:
        """``text`` on one line, cut with an ellipsis when wider than ``width_pt``."""
        if self.width_pt(text, size, bold) <= width_pt:
            return text
        while text and self.width_pt(text + "\u2026", size, bold) > width_pt:
            text = text[:-1]
        return text + "\u2026"


class PageFlow:
    """Pages that content flows down, one A4 Figure per page.

    Parameters
    ----------
    footer : str
        Left part of every page's footer (the plant and the report's title).
    measure : TextMeasure, optional
        Shared text measurer (one per report).
    """

    def __init__(self, footer: str, measure: TextMeasure | None = None) -> None:
        self.footer = footer
        self.measure = measure or TextMeasure()
        self.pages: list[Figure] = []
        self._fig: Figure | None = None
        self.y = MARGIN_TOP_IN

    # -- pages -------------------------------------------------------------------
    @property
    def width_in(self) -> float:
        """Width of the text column, inches."""
        return PAGE_W_IN - MARGIN_LEFT_IN - MARGIN_RIGHT_IN

    @property
    def fig(self) -> Figure:
        if self._fig is None:
            self.new_page()
        return self._fig

    def new_page(self) -> Figure:
        """Start a new page and return it."""
        self._fig = Figure(figsize=(PAGE_W_IN, PAGE_H_IN))
        self.pages.append(self._fig)
        self.y = MARGIN_TOP_IN
        return self._fig

    def room_in(self) -> float:
        """Height left on the current page, inches."""
        return PAGE_H_IN - MARGIN_BOTTOM_IN - self.y

    def at_top(self) -> bool:
        return self._fig is None or self.y <= MARGIN_TOP_IN + 1e-9

    def ensure(self, height_in: float) -> None:
        """Start a new page unless ``height_in`` fits on this one (or this one is empty)."""
        if self._fig is None:
            self.new_page()
        elif height_in > self.room_in() and not self.at_top():
            self.new_page()

    def gap(self, height_in: float) -> None:
        """Vertical space (dropped at the top of a page)."""
        if not self.at_top():
            self.y += height_in

    # -- drawing primitives --------------------------------------------------------
    def _text(self, x_in: float, y_top_in: float, s: str, size: float, *, bold: bool = False,
              italic: bool = False, colour: str = TEXT_COLOUR, ha: str = "left") -> None:
        fig = self.fig
        fig.text(x_in, PAGE_H_IN - y_top_in, s, transform=fig.dpi_scale_trans,
                 fontsize=size, fontweight="bold" if bold else "normal",
                 fontstyle="italic" if italic else "normal", color=colour, ha=ha, va="top",
                 parse_math=False)

    def _rule(self, x0_in: float, x1_in: float, y_top_in: float, *, colour: str = RULE_COLOUR,
              width_pt: float = 0.5) -> None:
        fig = self.fig
        y = PAGE_H_IN - y_top_in
        fig.add_artist(Line2D([x0_in, x1_in], [y, y], transform=fig.dpi_scale_trans,
                              color=colour, linewidth=width_pt))

    def _box(self, x_in: float, y_top_in: float, w_in: float, h_in: float, colour: str,
             edge: str = "none") -> None:
        fig = self.fig
        fig.add_artist(Rectangle((x_in, PAGE_H_IN - y_top_in - h_in), w_in, h_in,
                                 transform=fig.dpi_scale_trans, facecolor=colour,
                                 edgecolor=edge, linewidth=0.4, zorder=0.5))

    # -- content -------------------------------------------------------------------
    def heading(self, text: str, level: int = 1, keep_in: float = 1.0) -> None:
        """A heading, kept on the same page as at least ``keep_in`` inches after it."""
        size = {0: 17.0, 1: 12.5, 2: 9.5}[level]
        before = {0: 0.0, 1: 0.22, 2: 0.12}[level]
        h = size * LEADING / 72.0
        self.ensure(before + h + keep_in)
        self.gap(before)
        self._text(MARGIN_LEFT_IN, self.y, text, size, bold=True)
        self.y += h
        if level <= 1:
            self._rule(MARGIN_LEFT_IN, PAGE_W_IN - MARGIN_RIGHT_IN, self.y - 0.03,
                       colour=TEXT_COLOUR if level == 0 else RULE_COLOUR,
                       width_pt=1.0 if level == 0 else 0.6)
            self.y += 0.08

    def wrapped(self, text: str, size: float = BODY_PT, *, indent_in: float = 0.0,
                bold: bool = False) -> list[str]:
        return self.measure.wrap(text, (self.width_in - indent_in) * 72.0, size, bold)

    def paragraph(self, text: str, size: float = BODY_PT, *, indent_in: float = 0.0,
                  bullet: str | None = None, bold: bool = False, italic: bool = False,
                  colour: str = TEXT_COLOUR, after_in: float = 0.05) -> None:
        """Wrapped text, continuing on the next page when it does not fit."""
        text_indent = indent_in + (0.16 if bullet else 0.0)
        lh = size * LEADING / 72.0
        for i, line in enumerate(self.wrapped(text, size, indent_in=text_indent, bold=bold)):
            self.ensure(lh)
            if bullet and i == 0:
                self._text(MARGIN_LEFT_IN + indent_in, self.y, bullet, size, colour=colour)
            self._text(MARGIN_LEFT_IN + text_indent, self.y, line, size, bold=bold,
                       italic=italic, colour=colour)
            self.y += lh
        self.y += after_in

    def paragraph_height(self, text: str, size: float = BODY_PT, *, indent_in: float = 0.0,
                         after_in: float = 0.05) -> float:
        """Height :meth:`paragraph` would take, inches."""
        return len(self.wrapped(text, size, indent_in=indent_in)) * size * LEADING / 72.0 \
            + after_in

    def labelled(self, label: str, text: str, size: float = BODY_PT,
                 label_in: float = 1.0) -> None:
        """A line "label  text" with the label bold in a column of its own."""
        lh = size * LEADING / 72.0
        lines = self.wrapped(text, size, indent_in=label_in)
        for i, line in enumerate(lines):
            self.ensure(lh)
            if i == 0:
                self._text(MARGIN_LEFT_IN, self.y, label, size, bold=True)
            self._text(MARGIN_LEFT_IN + label_in, self.y, line, size)
            self.y += lh

    def table(self, columns: tuple[Column, ...], rows: list[list[str]], *,
              swatches: list[dict[int, str]] | None = None, size: float = 8.0) -> None:
        """A table whose rows flow onto the next pages, heading row repeated.

        Parameters
        ----------
        columns : tuple of Column
            Headings, width shares (summing to about 1) and alignments.
        rows : list of list of str
            Cell texts, one list per row in column order; long cells wrap.
        swatches : list of {column index: colour}, optional
            Per row, cells that start with a colour square before their text (for
            example the state).
        size : float
            Font size, points.
        """
        total = sum(c.width for c in columns)
        widths = [c.width / total * self.width_in for c in columns]
        lefts = [MARGIN_LEFT_IN + sum(widths[:j]) for j in range(len(columns))]
        lh = size * LEADING / 72.0
        swatch_in = size * 0.95 / 72.0  # a square about the height of a capital

        def cell_lines(text: str, w_in: float, bold: bool) -> list[str]:
            lines = self.measure.wrap(text, (w_in - 2 * CELL_PAD_IN) * 72.0, size, bold)
            if len(lines) > MAX_CELL_LINES:
                lines = lines[:MAX_CELL_LINES - 1] + ["\u2026"]
            return lines or [""]

        def draw(lines_per_cell: list[list[str]], swatch: dict[int, str], bold: bool,
                 row_fill: str | None) -> None:
            h = max(len(c) for c in lines_per_cell) * lh + 2 * CELL_PAD_IN
            if row_fill:
                self._box(MARGIN_LEFT_IN, self.y, self.width_in, h, row_fill)
            for j, lines in enumerate(lines_per_cell):
                shift = 0.0
                if j in swatch:
                    self._box(lefts[j] + CELL_PAD_IN, self.y + CELL_PAD_IN + 0.1 * lh,
                              swatch_in, swatch_in, swatch[j], edge="#444444")
                    shift = swatch_in + 0.05
                align = columns[j].align
                x = {"left": lefts[j] + CELL_PAD_IN + shift,
                     "right": lefts[j] + widths[j] - CELL_PAD_IN,
                     "center": lefts[j] + widths[j] / 2}[align]
                for k, line in enumerate(lines):
                    self._text(x, self.y + CELL_PAD_IN + k * lh, line, size, bold=bold,
                               ha=align)
            self.y += h
            self._rule(MARGIN_LEFT_IN, PAGE_W_IN - MARGIN_RIGHT_IN, self.y,
                       colour=TEXT_COLOUR if bold else RULE_COLOUR,
                       width_pt=0.8 if bold else 0.4)

        def row_lines(i: int, row: list[str]) -> list[list[str]]:
            marked = swatches[i] if swatches else {}
            return [cell_lines(str(t), w - (swatch_in + 0.05 if j in marked else 0.0), False)
                    for j, (t, w) in enumerate(zip(row, widths))]

        head = [cell_lines(c.title, w, True) for c, w in zip(columns, widths)]
        head_h = max(len(c) for c in head) * lh + 2 * CELL_PAD_IN
        body = [row_lines(i, row) for i, row in enumerate(rows)]
        heights = [max(len(c) for c in cells) * lh + 2 * CELL_PAD_IN for cells in body]
        self.ensure(head_h + (heights[0] if heights else 0.0))
        draw(head, {}, True, HEADER_FILL)
        for i, cells in enumerate(body):
            if heights[i] > self.room_in():
                self.new_page()
                draw(head, {}, True, HEADER_FILL)
            draw(cells, (swatches[i] if swatches else {}), False, None)
        self.y += 0.08

    def block(self, height_in: float) -> tuple[Figure, tuple[float, float, float, float]]:
        """Reserve the full text width for ``height_in`` inches (for a plot).

        Returns
        -------
        fig : Figure
            The page the block is on.
        rect_in : (left, bottom, width, height)
            The block, inches from the page's lower-left corner.
        """
        self.ensure(height_in)
        rect = (MARGIN_LEFT_IN, PAGE_H_IN - self.y - height_in, self.width_in, height_in)
        self.y += height_in
        return self.fig, rect

    def finish(self) -> list[Figure]:
        """Write the footer on every page and return the pages."""
        n = len(self.pages)
        right = PAGE_W_IN - MARGIN_RIGHT_IN
        for i, fig in enumerate(self.pages, start=1):
            self._fig = fig
            top = PAGE_H_IN - FOOTER_Y_IN - 0.12
            self._rule(MARGIN_LEFT_IN, right, top, width_pt=0.5)
            page = f"Page {i} of {n}"
            room = (self.width_in - 1.0) * 72.0
            self._text(MARGIN_LEFT_IN, top + 0.06, self.measure.fit(self.footer, room, 7.5),
                       7.5, colour="#444444")
            self._text(right, top + 0.06, page, 7.5, colour="#444444", ha="right")
        return self.pages
