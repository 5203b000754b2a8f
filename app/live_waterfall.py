"""The live waterfall: a scrolling image of spectra, newest at the top.

Each spectrum becomes one row of colour codes (uint8, fixed steps of dB re 1 unit), kept
in a ring of twice the rows shown so that the rows on screen are always one contiguous
slice: adding a row costs one row of work and the image is handed to pyqtgraph without
a copy.  The colour window (which dB range is coloured) only changes pyqtgraph's levels,
never the stored rows.  Colours: viridis, a perceptually uniform map (van der Walt &
Smith 2015, as shipped with pyqtgraph).
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF

#: dB re 1 unit of colour code 0, and dB per code: codes 0 … 255 cover −120 … +39.4 dB.
DB_LOW, DB_STEP = -120.0, 0.625
#: Most columns stored per row: longer spectra keep the highest of each group of
#: neighbouring lines (no peak is lost, as it would be when the screen scales a wide
#: image down) and the image stays cheap to draw.
MAX_COLUMNS = 2048


def db_to_code(db: float) -> float:
    """Colour code (0 … 255, not rounded) of a level in dB re 1 unit."""
    return float(np.clip((db - DB_LOW) / DB_STEP, 0.0, 255.0))


def code_to_db(code: float) -> float:
    """Level in dB re 1 unit of a colour code."""
    return DB_LOW + DB_STEP * float(code)


class WaterfallBuffer:
    """The last ``rows`` spectra as colour codes.

    Parameters
    ----------
    rows, lines : int
        Spectra kept and lines per spectrum.

    Attributes
    ----------
    pool : int
        Lines per column (1, or more for spectra longer than :data:`MAX_COLUMNS`).
    columns : int
        Columns per row.
    rows_added : int
        Rows added since the buffer was made or cleared.
    """

    def __init__(self, rows: int, lines: int) -> None:
        self.rows, self.lines = int(rows), int(lines)
        self.pool = -(-self.lines // MAX_COLUMNS)
        self.columns = -(-self.lines // self.pool)
        self._padded = np.zeros(self.columns * self.pool)
        self._codes = np.zeros((2 * self.rows, self.columns), dtype=np.uint8)
        self._db = np.zeros(self.columns)
        self._next = 0
        self.rows_added = 0
        self.peak_code = 0

    def clear(self) -> None:
        self._codes[:] = 0
        self._next = 0
        self.rows_added = 0
        self.peak_code = 0

    def add(self, amplitude: np.ndarray) -> None:
        """Add one spectrum (amplitudes in the shown unit, shape (lines,))."""
        db = self._db
        if self.pool > 1:
            self._padded[:self.lines] = amplitude
            np.max(self._padded.reshape(self.columns, self.pool), axis=1, out=db)
            np.maximum(db, 1e-30, out=db)
        else:
            np.maximum(amplitude, 1e-30, out=db)
        np.log10(db, out=db)
        db *= 20.0 / DB_STEP
        db -= DB_LOW / DB_STEP
        np.clip(db, 0.0, 255.0, out=db)
        i = self._next
        row = self._codes[i]
        np.rint(db, out=db)
        row[:] = db
        self._codes[i + self.rows] = row
        self._next = (i + 1) % self.rows
        self.rows_added += 1
        self.peak_code = max(self.peak_code, int(row[1:].max()) if row.size > 1 else 0)

    @property
    def filled(self) -> int:
        """Rows that hold a spectrum (at most ``rows``)."""
        return min(self.rows_added, self.rows)

    def image(self) -> np.ndarray:
        """The filled rows, oldest first (row 0), newest last: a view, shape
        (filled, columns)."""
        start = self._next + self.rows - self.filled
        return self._codes[start:start + self.filled]


class WaterfallPlot:
    """The waterfall's image, axes and colour bar in a pyqtgraph layout.

    Parameters
    ----------
    layout : pyqtgraph.GraphicsLayout
        Where the plot goes (a new row is used).
    """

    def __init__(self, layout: pg.GraphicsLayout, *, row: int) -> None:
        self.plot: pg.PlotItem = layout.addPlot(row=row, col=0)
        self.plot.setLabel("bottom", "frequency", units="Hz")
        self.plot.setLabel("left", "time (0 = now)", units="s")
        self.plot.setMenuEnabled(False)
        self.plot.getViewBox().setMouseEnabled(x=True, y=False)
        self.cmap = pg.colormap.get("viridis")
        self.image = pg.ImageItem(axisOrder="row-major")
        self.image.setLookupTable(self.cmap.getLookupTable(nPts=256, alpha=False))
        self.plot.addItem(self.image)
        self.bar = pg.ColorBarItem(values=(-80.0, 0.0), colorMap=self.cmap,
                                   interactive=False, width=14)
        layout.addItem(self.bar, row=row, col=1)
        self.unit_label = "unit"
        self.label_colour = "#1E1E1E"
        self._x0, self._width, self._row_s, self._shown_rows = 0.0, 1.0, 1.0, -1
        self._levels = (0.0, 255.0)
        self._window: tuple[float, float] | None = None

    def set_axes(self, buf: WaterfallBuffer, fmax_hz: float, resolution_hz: float,
                 row_s: float, unit_label: str) -> None:
        """Physical axes: x in Hz (lines centred), y in seconds, newest at 0."""
        rows = buf.rows
        self._x0, self._width = -resolution_hz / 2.0, buf.columns * buf.pool * resolution_hz
        self._row_s = row_s
        self._shown_rows = -1
        self.image.clear()
        self.plot.setXRange(0.0, fmax_hz, padding=0.0)
        self.plot.setYRange(-rows * row_s, 0.0, padding=0.0)
        self.unit_label = unit_label
        self.bar.setLabel("right", f"dB re 1 {unit_label}", color=self.label_colour)
        self._window = None

    def show(self, buf: WaterfallBuffer, span_db: float) -> None:
        """Draw ``buf``; the colour window spans ``span_db`` below the highest level
        seen (rounded up to 5 dB)."""
        top_db = 5.0 * np.ceil(code_to_db(buf.peak_code) / 5.0)
        if (top_db, span_db) != self._window:
            self._window = (top_db, span_db)
            self._levels = (db_to_code(top_db - span_db), db_to_code(top_db))
            self.bar.setLevels(values=(top_db - span_db, top_db))
        img = buf.image()
        if img.shape[0] == 0:
            return
        self.image.setImage(img, autoLevels=False, levels=self._levels)
        if img.shape[0] != self._shown_rows:  # until the waterfall is full
            self._shown_rows = img.shape[0]
            self.image.setRect(QRectF(self._x0, -self._shown_rows * self._row_s,
                                      self._width, self._shown_rows * self._row_s))
