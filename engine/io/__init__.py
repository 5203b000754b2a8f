"""Reading recordings from files: WAV, MATLAB .mat and delimited text (CSV/TSV).

:func:`read_recording` is the one entry point: it picks the reader by the file's
suffix, applies the input unit, the full scale and the sensor sensitivity, names the
channels, and attaches the data-quality findings of :mod:`engine.io.quality`.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Sequence

import numpy as np

from ..errors import InputError
from ..recording import Recording, apply_sensitivity
from ..units import VOLTAGE, parse_sensitivity, unit
from .csvfile import read_csv, write_csv
from .matfile import read_mat
from .quality import check_channel, check_quality
from .wav import WavInfo, read_wav, wav_info, write_wav

#: File suffixes :func:`read_recording` knows (compared ignoring case).
SUFFIXES = (".wav", ".mat", ".csv", ".tsv", ".txt")
_TEXT_SUFFIXES = (".csv", ".tsv", ".txt")

__all__ = ["SUFFIXES", "WavInfo", "check_channel", "check_quality", "read_csv", "read_mat",
           "read_recording", "read_wav", "wav_info", "write_csv", "write_wav"]


def read_recording(
    path: str | os.PathLike,
    *,
    input_unit: str = "g",
    sample_rate_hz: float | None = None,
    variable: str | None = None,
    full_scale: float | None = None,
    sensitivity: tuple[float, str] | str | None = None,
    time_column: str | int | None = None,
    channel_names: Sequence[str] | None = None,
) -> Recording:
    """Read a recording file of any known type and check its data quality.

    Parameters
    ----------
    path : str or path-like
        A ``.wav``, ``.mat``, ``.csv``, ``.tsv`` or ``.txt`` file (:data:`SUFFIXES`).
    input_unit : str, keyword-only
        Unit of the values in the file (see :mod:`engine.units`): ``"g"``, ``"m/s2"``,
        ``"mm/s"``, ..., or ``"V"`` for raw sensor voltage.
    sample_rate_hz : float, optional, keyword-only
        Sample rate, Hz.  Needed for .mat files without a sample-rate variable and for
        text files without a time column; for WAV it must match the header.
    variable : str, optional, keyword-only
        The signal variable of a .mat file.
    full_scale : float, optional, keyword-only
        Value of full scale in ``input_unit``.  For integer-PCM WAV it scales the
        samples (default 1.0); for .mat and text files it only declares the range of
        the acquisition, for the clipping check.
    sensitivity : (volts_per_unit, unit_symbol) or str, optional, keyword-only
        Sensor sensitivity, as returned by :func:`engine.units.parse_sensitivity`
        (a string such as ``"100mV/g"`` is parsed with it).  Requires
        ``input_unit="V"``; channels are converted to the sensitivity's unit.
    time_column : str or int, optional, keyword-only
        The time column of a text file (see :func:`engine.io.csvfile.read_csv`).
    channel_names : sequence of str, optional, keyword-only
        New names for the channels, one per channel.

    Returns
    -------
    Recording
        ``quality`` holds the reader's findings (``truncated``, ``uneven_time``)
        followed by those of :func:`engine.io.quality.check_quality`.

    Raises
    ------
    InputError
        Missing file, a folder, an unknown suffix, an option that does not apply to
        the file's type, or any problem the reader finds; the message names the file.

    Examples
    --------
    >>> rec = read_recording("survey/P-101_DE_H.wav", input_unit="V",
    ...                      sensitivity=parse_sensitivity("100mV/g"))  # doctest: +SKIP
    >>> rec.channels[0].unit  # doctest: +SKIP
    'g'
    """
    p = Path(path)
    src = str(p)
    if not p.exists():
        raise InputError(f"{src}: no such file")
    if p.is_dir():
        raise InputError(f"{src}: is a folder; expected a recording file ("
                         + ", ".join(SUFFIXES) + ")")
    suffix = p.suffix.lower()
    if suffix not in SUFFIXES:
        raise InputError(f"{src}: unknown file type {p.suffix or '(no suffix)'!r}; "
                         "expected one of " + ", ".join(SUFFIXES))
    symbol = unit(input_unit, source=src, field="input unit").symbol
    sens = _sensitivity(sensitivity, symbol, src)
    if variable is not None and suffix != ".mat":
        raise InputError(f"{src}: a variable name applies to .mat files only")
    if time_column is not None and suffix not in _TEXT_SUFFIXES:
        raise InputError(f"{src}: a time column applies to text files ("
                         + ", ".join(_TEXT_SUFFIXES) + ") only")

    if suffix == ".wav":
        rec = read_wav(p, input_unit=symbol, full_scale=full_scale)
        if sample_rate_hz is not None and abs(float(sample_rate_hz) - rec.fs_hz) > 1e-9 * rec.fs_hz:
            raise InputError(f"{src}: the WAV header gives {rec.fs_hz:g} Hz but "
                             f"{sample_rate_hz!r} Hz was given; leave out the sample rate")
    else:
        if suffix == ".mat":
            rec = read_mat(p, variable=variable, sample_rate_hz=sample_rate_hz,
                           input_unit=symbol)
        else:
            rec = read_csv(p, sample_rate_hz=sample_rate_hz, time_column=time_column,
                           input_unit=symbol)
        if full_scale is not None:
            value = float(full_scale)
            if not (np.isfinite(value) and value > 0):
                raise InputError(f"{src}: full scale must be a positive number in {symbol}, "
                                 f"got {full_scale!r}")
            for ch in rec.channels:
                ch.full_scale = value

    if sens is not None:
        rec.channels = [apply_sensitivity(ch, sens, source=src) for ch in rec.channels]
    if channel_names is not None:
        names = [str(n) for n in channel_names]
        if len(names) != len(rec.channels):
            raise InputError(f"{src}: {len(names)} channel names given for "
                             f"{len(rec.channels)} channel(s); give one name per channel")
        for ch, name in zip(rec.channels, names):
            ch.name = name
    rec.quality = list(rec.quality) + check_quality(rec)
    return rec


def _sensitivity(sensitivity, symbol: str, src: str) -> tuple[float, str] | None:
    if sensitivity is None:
        return None
    if unit(symbol).quantity != VOLTAGE:
        raise InputError(f"{src}: a sensitivity was given but the input unit is {symbol}; "
                         "give --input-unit V to convert volts with it")
    if isinstance(sensitivity, (str, int, float)):
        return parse_sensitivity(sensitivity)
    try:
        v_per_unit, sym = sensitivity
        v_per_unit = float(v_per_unit)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{src}: sensitivity {sensitivity!r}; expected (volts per unit, "
                         "unit symbol) as from parse_sensitivity") from exc
    if not (np.isfinite(v_per_unit) and v_per_unit > 0):
        raise InputError(f"{src}: sensitivity must be a positive number of volts per unit, "
                         f"got {v_per_unit!r}")
    target = unit(sym, source=src, field="sensitivity unit")
    if target.quantity == VOLTAGE:
        raise InputError(f"{src}: sensitivity must be per a vibration unit, not per volt")
    return v_per_unit, target.symbol
