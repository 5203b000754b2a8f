"""Reading and writing recordings as delimited text (CSV, TSV, whitespace columns).

Layout: a header row of column names, then one row of numbers per sample.  The
delimiter is found among tab, semicolon, comma and whitespace; lines starting with
``#`` are comments wherever they are, blank lines are skipped.  Decimals are written
with ``.``, or with ``,`` when the delimiter is a semicolon, a tab or whitespace (the
usual export of spreadsheets in locales with a decimal comma).  A time column, found
by its name (``time``, ``t``, ``time_s``, ``seconds``; ``time_ms`` in milliseconds) or
named by the caller, gives the sample rate; every other column is a channel.

Cells are parsed by :func:`numpy.loadtxt` first; when that fails or finds non-finite
values, a line-by-line pass names the line and column of the first bad cell.
"""

from __future__ import annotations

import os
import re
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..recording import Channel, QualityFinding, Recording
from ..units import unit

#: Normalised header names taken for a time column in seconds.
TIME_NAMES_S = frozenset({"time", "t", "time_s", "seconds", "time(s)", "time[s]", "time/s",
                          "t_s", "t(s)", "t[s]"})
#: Normalised header names taken for a time column in milliseconds.
TIME_NAMES_MS = frozenset({"time_ms", "time(ms)", "time[ms]", "time/ms", "t_ms", "t(ms)",
                           "t[ms]", "milliseconds"})
#: Time steps may deviate this much from the median step before ``uneven_time``.
UNEVEN_TOLERANCE = 0.01
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_NAN_LITERALS = ("nan", "NaN")
_WHITESPACE = " "  # marker: split on runs of whitespace
_WRITE_BLOCK = 1 << 16


def read_csv(path: str | os.PathLike, *, sample_rate_hz: float | None = None,
             time_column: str | int | None = None, input_unit: str = "g") -> Recording:
    """Read a delimited text file as a recording.

    Parameters
    ----------
    path : str or path-like
    sample_rate_hz : float, optional, keyword-only
        Sample rate, Hz.  Required when there is no time column; when there is one,
        it must agree with it within 1 %.
    time_column : str or int, optional, keyword-only
        Header name (matched exactly, then ignoring case) or 0-based index of the time
        column, in seconds (milliseconds when the name ends with ``ms``).  Default:
        the first column whose name is one of :data:`TIME_NAMES_S` or
        :data:`TIME_NAMES_MS`.
    input_unit : str, keyword-only
        Unit of the channel values (see :mod:`engine.units`).

    Returns
    -------
    Recording
        One channel per non-time column, named by its header.  ``quality`` holds an
        ``uneven_time`` warning when time steps deviate by more than 1 % of the median
        step (beyond the resolution of the time text).

    Raises
    ------
    InputError
        Unreadable file, no header row, a row with another number of columns than the
        header (names the line), an empty or non-numeric cell (names line and column;
        ``nan``/``NaN`` are read as NaN), time that does not increase, or no sample
        rate.

    Notes
    -----
    With even steps, the sample rate is (n - 1) / (t_last - t_first), which averages
    out the rounding of the time text; with uneven steps it is 1 / median step.
    """
    src = str(path)
    symbol = unit(input_unit, source=src, field="input unit").symbol
    if sample_rate_hz is not None:
        given = float(sample_rate_hz)
        if not (np.isfinite(given) and given > 0):
            raise InputError(f"{src}: sample rate must be a positive number of Hz, got "
                             f"{sample_rate_hz!r}")
    header_no, header, rows, line_nos = _lines(_read_text(path, src), src)
    delimiter = _sniff(header, rows)
    names = [_unquote(c) for c in _split(header, delimiter)]
    for j, name in enumerate(names):
        if not name:
            raise InputError(f"{src}: line {header_no}: column {j + 1} has no name; the "
                             "first row must name every column")
    if all(_NUMBER.match(n.replace(",", ".")) or n in _NAN_LITERALS for n in names):
        raise InputError(f"{src}: line {header_no} holds numbers; expected a header row of "
                         "column names (for example time,accel) before the data")
    if not rows:
        raise InputError(f"{src}: no data rows after the header on line {header_no}")
    decimal_comma = delimiter != "," and any("," in r for r in rows)
    values = _parse(rows, line_nos, delimiter, decimal_comma, names, header_no, src)

    t_index, t_scale = _time_column(names, time_column, src)
    quality: list[QualityFinding] = []
    if t_index is not None:
        fs = _rate_from_time(values[:, t_index] * t_scale, names[t_index], line_nos,
                             _resolution(rows, delimiter, t_index) * t_scale, quality, src)
        if sample_rate_hz is not None and abs(fs - given) > 0.01 * given:
            raise InputError(f"{src}: time column {names[t_index]!r} gives {fs:.6g} Hz but "
                             f"{given:g} Hz was given; leave out the sample rate or fix it")
    elif sample_rate_hz is None:
        raise InputError(f"{src}: no time column (a column named time, t, time_s or "
                         "seconds) and no sample rate; give --sample-rate or --time-column")
    else:
        fs = given
    channels = [Channel(samples=np.ascontiguousarray(values[:, j]), unit=symbol, name=names[j])
                for j in range(len(names)) if j != t_index]
    if not channels:
        raise InputError(f"{src}: only a time column; expected at least one channel column")
    return Recording(fs_hz=fs, channels=channels, source=src, quality=quality)


def _read_text(path, src: str) -> str:
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise InputError(f"{src}: cannot be read ({exc.strerror or exc})") from exc
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("latin-1")  # names only; numbers are ASCII in any case


def _lines(text: str, src: str) -> tuple[int, str, list[str], list[int]]:
    """Header (line number and text) and data rows with their 1-based line numbers."""
    header_no, header = 0, None
    rows: list[str] = []
    line_nos: list[int] = []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        if header is None:
            header_no, header = number, stripped
        else:
            rows.append(stripped)
            line_nos.append(number)
    if header is None:
        raise InputError(f"{src}: no header row and no data; expected a row of column "
                         "names followed by rows of numbers")
    return header_no, header, rows, line_nos


def _sniff(header: str, rows: list[str]) -> str | None:
    """The delimiter: the first of tab, ';', ',' used the same number of times in the
    header and the first rows; else whitespace when it splits the header; else the
    first of them in the header (rows that disagree are then reported by line)."""
    sample = rows[:20]
    for d in ("\t", ";", ","):
        k = header.count(d)
        if k and all(r.count(d) == k for r in sample):
            return d
    if len(header.split()) > 1:
        return _WHITESPACE
    for d in ("\t", ";", ","):
        if d in header:
            return d
    return None  # one column


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return [line]
    if delimiter == _WHITESPACE:
        return line.split()
    return line.split(delimiter)


def _unquote(cell: str) -> str:
    c = cell.strip()
    if len(c) >= 2 and c[0] == c[-1] and c[0] in "\"'":
        c = c[1:-1].strip()
    return c


def _parse(rows, line_nos, delimiter, decimal_comma, names, header_no, src) -> np.ndarray:
    k = len(names)
    lines = [r.replace(",", ".") for r in rows] if decimal_comma else rows
    try:
        values = np.loadtxt(lines, delimiter=None if delimiter in (None, _WHITESPACE)
                            else delimiter, dtype=np.float64, ndmin=2, comments=None,
                            quotechar='"')
    except ValueError:
        values = None
    if values is not None and values.shape == (len(rows), k) and np.isfinite(values).all():
        return values
    # The slow pass is the reference: it accepts exactly what the docstring says and
    # names the first bad line and cell.
    out = np.empty((len(rows), k), dtype=np.float64)
    for r, (number, line) in enumerate(zip(line_nos, rows)):
        cells = _split(line, delimiter)
        if len(cells) != k:
            raise InputError(f"{src}: line {number} has {len(cells)} columns; expected {k} "
                             f"as in the header on line {header_no}")
        for j, cell in enumerate(cells):
            text = _unquote(cell)
            if text in _NAN_LITERALS:
                out[r, j] = np.nan
                continue
            number_text = text.replace(",", ".") if decimal_comma else text
            if not text:
                raise InputError(f"{src}: line {number}, column {j + 1} ({names[j]!r}) is "
                                 "empty; expected a number (or nan)")
            if not _NUMBER.match(number_text):
                raise InputError(f"{src}: line {number}, column {j + 1} ({names[j]!r}): "
                                 f"{text!r} is not a number; expected a number (or nan)")
            out[r, j] = float(number_text)
    return out


def _normalise(name: str) -> str:
    return re.sub(r"\s+", "", name).lower()


def _time_column(names: list[str], time_column, src: str) -> tuple[int | None, float]:
    def scale_of(name: str) -> float:
        key = _normalise(name)
        return 1e-3 if key in TIME_NAMES_MS or re.search(r"[_(\[/]ms[)\]]?$", key) else 1.0

    if time_column is None:
        for j, name in enumerate(names):
            key = _normalise(name)
            if key in TIME_NAMES_S or key in TIME_NAMES_MS:
                return j, scale_of(name)
        return None, 1.0
    if isinstance(time_column, (int, np.integer)) and not isinstance(time_column, bool):
        if not 0 <= time_column < len(names):
            raise InputError(f"{src}: time column {time_column} does not exist; columns are "
                             f"numbered 0 to {len(names) - 1}")
        return int(time_column), scale_of(names[time_column])
    wanted = str(time_column)
    for test in (lambda n: n == wanted, lambda n: n.lower() == wanted.lower()):
        for j, name in enumerate(names):
            if test(name):
                return j, scale_of(name)
    raise InputError(f"{src}: no column named {wanted!r} for the time; columns are "
                     + ", ".join(repr(n) for n in names))


def _resolution(rows: list[str], delimiter, index: int) -> float:
    """Step of the last written decimal of the time text (0 when written with an
    exponent), from the first rows."""
    decimals = 0
    for line in rows[:1000]:
        cells = _split(line, delimiter)
        if index >= len(cells):
            continue
        text = _unquote(cells[index])
        if "e" in text.lower():
            return 0.0
        for mark in (".", ","):
            if mark in text:
                decimals = max(decimals, len(text) - text.index(mark) - 1)
    return 10.0 ** -decimals


def _rate_from_time(t: np.ndarray, name: str, line_nos: list[int], resolution_s: float,
                    quality: list[QualityFinding], src: str) -> float:
    if t.size < 2:
        raise InputError(f"{src}: time column {name!r} has {t.size} row; at least two are "
                         "needed to give the sample rate")
    bad = np.flatnonzero(~np.isfinite(t))
    if bad.size:
        raise InputError(f"{src}: line {line_nos[bad[0]]}: time column {name!r} holds "
                         f"{t[bad[0]]}; expected a finite time")
    steps = np.diff(t)
    back = np.flatnonzero(steps <= 0)
    if back.size:
        i = int(back[0])
        raise InputError(f"{src}: line {line_nos[i + 1]}: time in column {name!r} does not "
                         f"increase ({t[i + 1]!r} s after {t[i]!r} s); expected increasing time")
    median = float(np.median(steps))
    deviation = float(np.max(np.abs(steps - median)))
    # Rounding of the time text moves a step by up to one written decimal; that is not
    # unevenness, as long as the decimal is finer than half a step.
    allowance = UNEVEN_TOLERANCE * median + (resolution_s if resolution_s < 0.5 * median
                                             else 0.0)
    if deviation > allowance:
        quality.append(QualityFinding(
            "uneven_time", "warning",
            f"{src}: time steps in column {name!r} deviate by up to "
            f"{100.0 * deviation / median:.3g} % from the median step {median:.6g} s; "
            "the sample rate is taken from the median step", None))
        return 1.0 / median
    return (t.size - 1) / float(t[-1] - t[0])


def write_csv(path: str | os.PathLike, recording: Recording, *, with_time: bool = True,
              delimiter: str = ",") -> Path:
    """Write a recording as delimited text that :func:`read_csv` reads back exactly.

    Parameters
    ----------
    path : str or path-like
    recording : Recording
        All channels must have the same number of samples.
    with_time : bool, keyword-only
        Write a first column ``time_s`` (sample index / sample rate, s).  Without it,
        reading back needs the sample rate.
    delimiter : {",", ";", "\\t"}, keyword-only

    Returns
    -------
    pathlib.Path
        The file written.  A first comment line records the sample rate and units;
        values are written with 17 significant digits, so they read back unchanged.
    """
    dest = Path(path)
    src = str(dest)
    if delimiter not in (",", ";", "\t"):
        raise InputError(f"{src}: delimiter {delimiter!r}; expected ',', ';' or a tab")
    chans = recording.channels
    if not chans:
        raise InputError(f"{src}: the recording has no channels to write")
    n = int(np.asarray(chans[0].samples).size)
    if any(np.asarray(c.samples).size != n for c in chans):
        raise InputError(f"{src}: every channel must hold the same number of samples")
    names = [c.name or f"ch{i + 1}" for i, c in enumerate(chans)]
    for name in names:
        if delimiter in name or (delimiter != "\t" and "\t" in name):
            raise InputError(f"{src}: channel name {name!r} holds the delimiter "
                             f"{delimiter!r}; rename the channel or choose another delimiter")
    header = delimiter.join((["time_s"] if with_time else []) + names)
    units = ", ".join(f"{name} in {c.unit}" for name, c in zip(names, chans))
    with open(dest, "w", encoding="utf-8", newline="\n") as f:
        f.write(f"# sample rate {recording.fs_hz!r} Hz; {units}\n{header}\n")
        for start in range(0, n, _WRITE_BLOCK):
            stop = min(start + _WRITE_BLOCK, n)
            cols = [np.asarray(c.samples[start:stop], dtype=np.float64) for c in chans]
            if with_time:
                cols.insert(0, np.arange(start, stop) / recording.fs_hz)
            np.savetxt(f, np.column_stack(cols), fmt="%.17g", delimiter=delimiter)
    return dest
