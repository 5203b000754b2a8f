"""What an import computes: run metadata, the summary values and a streamed WAV reader.

The summary is :func:`engine.levels.overall_levels` of one channel: the point's chosen
channel, else the first channel that is not the tachometer.

A large WAV file is imported without holding it in memory (:class:`StreamedWav`): it is
read in blocks of frames, decoded exactly as :func:`engine.io.wav.read_wav` decodes it
(so that the run id is the same either way), and each block goes straight to the run
file.  The summary and the data-quality checks of a streamed import look at the first
:data:`STREAM_LEADING_SAMPLES` samples of each channel (about 41 s at 25.6 kHz); only
the count of NaN or infinite samples covers the whole record.  ``/summary`` records how
many samples were used (``samples_used``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..io import check_quality, wav_info
from ..io.quality import check_channel
from ..io.wav import _decode, _dtype  # the reader's own decoding, so run ids agree
from ..levels import overall_levels
from ..recording import Channel, QualityFinding, Recording
from ..units import VOLTAGE, parse_sensitivity, unit
from .schema import now_utc, parse_time

#: Samples per channel kept from the start of a streamed WAV for summary and checks
#: (at most 2**22 samples over all channels).
STREAM_LEADING_SAMPLES = 1 << 20
#: Frames read and written per block in a streamed import.
STREAM_BLOCK_FRAMES = 1 << 19


@dataclass(frozen=True)
class ImportResult:
    """Outcome of importing one recording.

    ``run_id`` is the stored run's id; ``duplicate_of`` is that same id when the
    recording was already in the archive (nothing was stored), else ``None``.
    """

    run_id: str
    duplicate_of: str | None
    point: str
    file: str | None = None

    @property
    def duplicate(self) -> bool:
        return self.duplicate_of is not None


def summary_channel(n_channels: int, tach_channel: int | None, chosen: int | None) -> int:
    """Index of the channel whose levels make the summary."""
    if chosen is not None and chosen >= 0:
        if chosen >= n_channels:
            raise InputError(f"channel {chosen} does not exist; the recording has "
                             f"{n_channels} channel(s), numbered 0 to {n_channels - 1}")
        return chosen
    for i in range(n_channels):
        if i != tach_channel:
            return i
    return 0


def summary_attrs(samples: np.ndarray, fs_hz: float, unit_symbol: str, *, rpm: float | None,
                  channel: int, source: str, samples_used: int | None = None) -> dict:
    """The ``/summary`` attributes: overall levels, or NaN with a ``note`` saying why."""
    out = {"channel": np.int64(channel),
           "samples_used": np.int64(samples.size if samples_used is None else samples_used)}
    try:
        lv = overall_levels(samples, fs_hz, unit_in=unit_symbol, rpm=rpm, source=source)
    except InputError as exc:
        for k in ("velocity_rms_mm_s", "acceleration_rms_g", "acceleration_peak_g",
                  "displacement_pp_um", "crest_factor", "kurtosis", "skewness"):
            out[k] = np.float64(math.nan)
        out["velocity_band_hz"] = np.array([math.nan, math.nan])
        out["note"] = str(exc)
        return out
    d = lv.as_dict()
    out["velocity_band_hz"] = np.asarray(d.pop("velocity_band_hz"), dtype=np.float64)
    for k, v in d.items():
        out[k] = np.float64(v)
    out["note"] = ""
    return out


def merged_quality(rec: Recording) -> list[QualityFinding]:
    """The reader's findings plus any of :func:`engine.io.check_quality` not yet there
    (a recording made in memory has not been checked)."""
    have = {(q.code, q.channel) for q in rec.quality}
    return list(rec.quality) + [q for q in check_quality(rec) if (q.code, q.channel) not in have]


def resolve_taken(taken, recorded: datetime | None, taken_source: str | None
                  ) -> tuple[datetime, str]:
    """When a run was taken and where that came from (given, recording, import time)."""
    if taken is not None:
        return parse_time(taken, field="taken"), taken_source or "given"
    if recorded is not None:
        return parse_time(recorded, field="taken"), "recording"
    return now_utc(), "import time"


def check_rpm(rpm, source: str) -> float | None:
    if rpm is None:
        return None
    v = float(rpm)
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"{source}: rpm must be a positive number of rev/min, got {rpm!r}")
    return v


def check_tach(tach: int | None, n_channels: int, source: str) -> int | None:
    if tach is None or tach < 0:
        return None
    if tach >= n_channels:
        raise InputError(f"{source}: tach channel {tach} does not exist; the recording has "
                         f"{n_channels} channel(s)")
    return int(tach)


class StreamedWav:
    """A WAV file read block by block, decoded exactly as :func:`engine.io.wav.read_wav`.

    Parameters
    ----------
    path : path-like
    input_unit : str, keyword-only
        Unit of the samples (``"V"`` with a sensitivity).
    full_scale : float, optional, keyword-only
        Value of integer full scale in ``input_unit`` (integer PCM only; default 1).
    sensitivity : (V per unit, unit) or str, optional, keyword-only
        Converts volts to the sensitivity's unit.
    """

    def __init__(self, path, *, input_unit: str = "g", full_scale: float | None = None,
                 sensitivity=None):
        self.path = Path(path)
        src = self.source = str(self.path)
        self.info = info = wav_info(self.path)
        symbol = unit(input_unit, source=src, field="input unit").symbol
        if full_scale is not None and info.format == "float":
            raise InputError(f"{src}: full scale applies to integer PCM; this file holds "
                             f"{info.bits}-bit float samples, which are taken as they are")
        self.scale = 1.0 if full_scale is None else float(full_scale)
        if not (np.isfinite(self.scale) and self.scale > 0):
            raise InputError(f"{src}: full scale must be a positive number in {symbol}, "
                             f"got {full_scale!r}")
        self.v_per_unit = None
        out_symbol = symbol
        if sensitivity is not None:
            if unit(symbol).quantity != VOLTAGE:
                raise InputError(f"{src}: a sensitivity was given but the input unit is "
                                 f"{symbol}; give --input-unit V to convert volts with it")
            if isinstance(sensitivity, (str, int, float)):
                sensitivity = parse_sensitivity(sensitivity)
            self.v_per_unit, out_symbol = float(sensitivity[0]), unit(sensitivity[1]).symbol
        fs = self.scale if info.format == "pcm" else None
        if fs is not None and self.v_per_unit is not None:
            fs = fs / self.v_per_unit
        self.channels = [Channel(np.zeros(0), out_symbol, name=f"ch{c + 1}", full_scale=fs,
                                 sensitivity_v_per_unit=self.v_per_unit)
                         for c in range(info.channels)]
        self.fs_hz = info.fs_hz
        self.n_samples = info.n_frames

    def blocks(self, block_frames: int = STREAM_BLOCK_FRAMES):
        """Yield ``(start, columns)``: the next frames as one float64 array per channel.

        Each channel is decoded on its own from the interleaved frames, straight into
        a contiguous array, with the same arithmetic as the reader (so the values are
        identical)."""
        info = self.info
        n, n_ch = info.n_frames, info.channels
        if info.bits == 24:
            dtype, shape_tail = np.dtype(np.uint8), (n_ch, 3)
        else:
            dtype, shape_tail = _dtype(info.format, info.bits), (n_ch,)
        per_frame = int(np.prod(shape_tail))
        with open(self.path, "rb") as f:
            f.seek(info.data_offset)
            for start in range(0, n, block_frames):
                frames = min(block_frames, n - start)
                raw = np.fromfile(f, dtype=dtype, count=frames * per_frame)
                if raw.size != frames * per_frame:
                    raise InputError(f"{self.source}: the file ended early while reading "
                                     f"frame {start + raw.size // per_frame}")
                raw = raw.reshape((frames,) + shape_tail)
                cols = []
                for c in range(n_ch):
                    x = _decode(raw[:, c], info.format, info.bits)
                    if self.scale != 1.0:
                        x *= self.scale
                    if self.v_per_unit is not None:
                        x = x / self.v_per_unit
                    cols.append(np.ascontiguousarray(x))
                yield start, cols

    def quality(self, leading: list[np.ndarray], non_finite: list[int]) -> list[QualityFinding]:
        """Findings of a streamed read (see module notes for what each check covers)."""
        found = []
        if self.info.truncated:
            found.append(QualityFinding(
                "truncated", "warning",
                f"{self.source}: the 'data' chunk is cut short; read the "
                f"{self.info.n_frames} whole frames present", None))
        for i, (ch, head) in enumerate(zip(self.channels, leading)):
            ch_found = [q for q in check_channel(Channel(head, ch.unit, ch.name,
                                                         full_scale=ch.full_scale),
                                                 index=i, source=self.source)
                        if q.code != "non_finite"]
            if non_finite[i]:  # counted over the whole record, worded as check_channel does
                at = 1 if ch_found and ch_found[0].code == "too_short" else 0
                ch_found.insert(at, QualityFinding(
                    "non_finite", "error",
                    f"{self.source}: channel {i} ({ch.name}): {non_finite[i]} of "
                    f"{self.n_samples} samples are NaN or infinite", i))
            found.extend(ch_found)
        return found
