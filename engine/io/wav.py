"""Reading and writing RIFF/WAVE files with our own chunk parser.

Supported sample formats: integer PCM of 8 (unsigned, offset 128), 16, 24 (packed
3-byte little endian) and 32 bits; IEEE float of 32 and 64 bits; the same inside
``WAVE_FORMAT_EXTENSIBLE`` (tag 0xFFFE, subformat GUID PCM or IEEE float); any number
of channels, interleaved by frame.  Chunks other than ``'fmt '`` and ``'data'`` (LIST,
fact, cue, bext, ...) are skipped; odd-sized chunks are followed by one pad byte.

Integer PCM is scaled to ±1 of full scale (divided by 2**(bits-1); 8-bit as
(x - 128)/128) and then multiplied by the full-scale value given in the input unit.
Float samples are taken as they are.  Samples are read through :class:`numpy.memmap`
in blocks, so that a large file is decoded straight into one float64 array without
an intermediate copy of its bytes.

References
----------
.. [1] IBM Corporation and Microsoft Corporation (1991), Multimedia Programming
   Interface and Data Specifications 1.0 — RIFF chunk layout, WAVE 'fmt ' and 'data'
   chunks, pad byte after odd-sized chunks (from memory).
.. [2] Microsoft, WAVEFORMATEXTENSIBLE structure (mmreg.h, ksmedia.h) — cbSize 22,
   valid bits, channel mask, subformat GUIDs KSDATAFORMAT_SUBTYPE_PCM
   {00000001-0000-0010-8000-00AA00389B71} and KSDATAFORMAT_SUBTYPE_IEEE_FLOAT
   {00000003-0000-0010-8000-00AA00389B71} (from memory).
"""

from __future__ import annotations

import os
import struct
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import EngineWarning, InputError
from ..recording import Channel, QualityFinding, Recording
from ..units import unit

WAVE_FORMAT_PCM = 0x0001
WAVE_FORMAT_IEEE_FLOAT = 0x0003
WAVE_FORMAT_EXTENSIBLE = 0xFFFE
#: Bytes 2..15 shared by the PCM and IEEE-float subformat GUIDs ([2]).
_GUID_TAIL = b"\x00\x00\x00\x00\x10\x00\x80\x00\x00\xaa\x00\x38\x9b\x71"
#: Bits per sample the reader accepts (8-32 integer PCM; 32 and 64 float).
SUPPORTED_BITS = (8, 16, 24, 32, 64)
_PCM_BITS = (8, 16, 24, 32)
_FLOAT_BITS = (32, 64)
#: Frames decoded per block; bounds the temporary memory of a read or a write.
_BLOCK_FRAMES = 1 << 18
#: Largest data chunk a RIFF file can hold (its size fields are 32-bit).
_MAX_DATA_BYTES = 2**32 - 1 - 128
_KNOWN_TAGS = {0x0002: "Microsoft ADPCM", 0x0006: "A-law", 0x0007: "mu-law",
               0x0011: "IMA ADPCM", 0x0031: "GSM 6.10", 0x0055: "MPEG layer 3"}


@dataclass(frozen=True)
class WavInfo:
    """Header facts of a WAV file, read without reading its samples.

    Attributes
    ----------
    channels : int
    fs_hz : float
        Sample rate, Hz.
    bits : int
        Bits per sample (container size).
    format : str
        ``"pcm"`` (integer) or ``"float"``.
    n_frames : int
        Whole frames (one sample per channel) present in the file.
    data_offset : int
        Byte offset of the first sample.
    block_align : int
        Bytes per frame.
    extensible : bool
        True for ``WAVE_FORMAT_EXTENSIBLE``.
    truncated : bool
        True when the data chunk is shorter than its header declares or ends in a
        partial frame.
    """

    channels: int
    fs_hz: float
    bits: int
    format: str
    n_frames: int
    data_offset: int
    block_align: int
    extensible: bool = False
    truncated: bool = False

    @property
    def duration_s(self) -> float:
        """Length of the recording, s."""
        return self.n_frames / self.fs_hz


def wav_info(path: str | os.PathLike) -> WavInfo:
    """Read the header of a WAV file.

    Parameters
    ----------
    path : str or path-like

    Returns
    -------
    WavInfo

    Raises
    ------
    InputError
        When the file cannot be read or is not a WAV file this module can read; the
        message names the file and the problem.
    """
    src = str(path)
    try:
        size = os.path.getsize(path)
        with open(path, "rb") as f:
            return _scan(f, size, src)
    except OSError as exc:
        raise InputError(f"{src}: cannot be read ({exc.strerror or exc})") from exc


def _scan(f, size: int, src: str) -> WavInfo:
    head = f.read(12)
    if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
        if head[:4] in (b"RF64", b"BW64"):
            raise InputError(f"{src}: RF64/BW64 (WAV over 4 GiB) is not supported; "
                             "expected a RIFF/WAVE file")
        raise InputError(f"{src}: not a WAV file; expected the header 'RIFF' ... 'WAVE', "
                         f"found {head[:4]!r} ... {head[8:12]!r}")
    fmt = None
    data = None
    pos = 12
    while pos + 8 <= size:
        f.seek(pos)
        chunk_id, chunk_size = struct.unpack("<4sI", f.read(8))
        body = pos + 8
        if chunk_id == b"fmt " and fmt is None:
            fmt = f.read(min(chunk_size, 64))
        elif chunk_id == b"data" and data is None:
            data = (body, chunk_size)
            if body + chunk_size > size:
                break  # the data runs to the end of the file (truncated or streamed)
        pos = body + chunk_size + (chunk_size & 1)
    if fmt is None:
        raise InputError(f"{src}: no 'fmt ' chunk; a WAV file needs one before its samples")
    if data is None:
        raise InputError(f"{src}: no 'data' chunk; the file holds no samples")
    if len(fmt) < 16:
        raise InputError(f"{src}: 'fmt ' chunk is {len(fmt)} bytes; expected at least 16")
    tag, n_ch, fs, _byte_rate, block_align, bits = struct.unpack("<HHIIHH", fmt[:16])
    extensible = tag == WAVE_FORMAT_EXTENSIBLE
    if extensible:
        if len(fmt) < 40:
            raise InputError(f"{src}: WAVE_FORMAT_EXTENSIBLE 'fmt ' chunk is {len(fmt)} "
                             "bytes; expected 40")
        guid = fmt[24:40]
        if guid[2:] != _GUID_TAIL:
            raise InputError(f"{src}: WAVE_FORMAT_EXTENSIBLE subformat GUID {guid.hex()} "
                             "is not known; expected PCM or IEEE float")
        tag = struct.unpack("<H", guid[:2])[0]
    if n_ch == 0:
        raise InputError(f"{src}: 'fmt ' chunk gives 0 channels; expected at least 1")
    if fs == 0:
        raise InputError(f"{src}: 'fmt ' chunk gives a sample rate of 0 Hz; expected a "
                         "positive sample rate")
    if tag == WAVE_FORMAT_PCM:
        kind, allowed = "pcm", _PCM_BITS
    elif tag == WAVE_FORMAT_IEEE_FLOAT:
        kind, allowed = "float", _FLOAT_BITS
    else:
        name = _KNOWN_TAGS.get(tag, "unknown")
        raise InputError(f"{src}: sample format tag 0x{tag:04X} ({name}) is not supported; "
                         "expected integer PCM (1), IEEE float (3) or extensible (0xFFFE)")
    if bits not in SUPPORTED_BITS:
        raise InputError(f"{src}: {bits} bits per sample is not supported; expected one of "
                         + ", ".join(map(str, SUPPORTED_BITS)))
    if bits not in allowed:
        what = "integer PCM" if kind == "pcm" else "IEEE float"
        raise InputError(f"{src}: {bits}-bit {what} is not supported; expected "
                         f"{' or '.join(map(str, allowed))} bits for {what}")
    frame_bytes = n_ch * bits // 8
    if block_align != frame_bytes:
        raise InputError(f"{src}: 'fmt ' block align is {block_align} bytes; expected "
                         f"channels × bytes per sample = {frame_bytes}")
    offset, declared = data
    if declared == 0:
        raise InputError(f"{src}: 'data' chunk is empty (size 0); the file holds no samples")
    available = max(0, size - offset)
    n_frames = min(declared, available) // frame_bytes
    if n_frames == 0:
        raise InputError(f"{src}: 'data' chunk holds no whole frame ({min(declared, available)} "
                         f"bytes present; a frame is {frame_bytes} bytes)")
    truncated = declared > available or declared % frame_bytes != 0
    return WavInfo(channels=n_ch, fs_hz=float(fs), bits=bits, format=kind,
                   n_frames=int(n_frames), data_offset=offset, block_align=frame_bytes,
                   extensible=extensible, truncated=truncated)


def read_wav(path: str | os.PathLike, *, input_unit: str, full_scale: float | None = None
             ) -> Recording:
    """Read a WAV file into a :class:`~engine.recording.Recording`.

    Parameters
    ----------
    path : str or path-like
    input_unit : str, keyword-only
        Unit of the samples (see :mod:`engine.units`), for example ``"g"`` or ``"V"``.
    full_scale : float, optional, keyword-only
        Value, in ``input_unit``, of integer full scale (for example 5.0 for a ±5 V
        input range, 50.0 for ±50 g).  Default 1.0.  Integer PCM only.

    Returns
    -------
    Recording
        One float64 channel per WAV channel, named ``ch1``, ``ch2``, ...; for integer
        PCM ``Channel.full_scale`` is the full-scale value.  ``quality`` holds a
        ``truncated`` warning when the data chunk is cut short.

    Raises
    ------
    InputError
        For a file that is not a readable WAV file, or ``full_scale`` given for float
        samples or not a positive number.
    """
    src = str(path)
    info = wav_info(path)
    symbol = unit(input_unit, source=src, field="input unit").symbol
    if full_scale is not None and info.format == "float":
        raise InputError(f"{src}: full scale applies to integer PCM; this file holds "
                         f"{info.bits}-bit float samples, which are taken as they are")
    scale = 1.0 if full_scale is None else float(full_scale)
    if not (np.isfinite(scale) and scale > 0):
        raise InputError(f"{src}: full scale must be a positive number in {symbol}, "
                         f"got {full_scale!r}")
    samples = _read_samples(path, info)
    if scale != 1.0:
        samples *= scale
    is_pcm = info.format == "pcm"
    channels = [Channel(samples=samples[c], unit=symbol, name=f"ch{c + 1}",
                        full_scale=scale if is_pcm else None)
                for c in range(info.channels)]
    quality = []
    if info.truncated:
        quality.append(QualityFinding(
            "truncated", "warning",
            f"{src}: the 'data' chunk is cut short; read the {info.n_frames} whole "
            "frames present", None))
    return Recording(fs_hz=info.fs_hz, channels=channels, source=src, quality=quality)


def _read_samples(path, info: WavInfo) -> np.ndarray:
    """Decode all frames into a float64 array of shape (channels, n_frames)."""
    n, n_ch = info.n_frames, info.channels
    if info.bits == 24:
        raw = np.memmap(path, dtype=np.uint8, mode="r", offset=info.data_offset,
                        shape=(n, n_ch, 3))
    else:
        raw = np.memmap(path, dtype=_dtype(info.format, info.bits), mode="r",
                        offset=info.data_offset, shape=(n, n_ch))
    out = np.empty((n_ch, n), dtype=np.float64)
    try:
        for start in range(0, n, _BLOCK_FRAMES):
            stop = min(start + _BLOCK_FRAMES, n)
            out[:, start:stop] = _decode(raw[start:stop], info.format, info.bits).T
    finally:
        del raw
    return out


def _dtype(kind: str, bits: int) -> np.dtype:
    if kind == "float":
        return np.dtype("<f4" if bits == 32 else "<f8")
    return np.dtype({8: "u1", 16: "<i2", 32: "<i4"}[bits])


def _decode(block: np.ndarray, kind: str, bits: int) -> np.ndarray:
    """One block of raw samples to float64, integer PCM scaled to ±1."""
    if kind == "float":
        return block.astype(np.float64)
    if bits == 8:
        x = block.astype(np.float64)
        x -= 128.0
        x *= 1.0 / 128.0
        return x
    if bits == 24:
        b = block.astype(np.int32)
        v = b[..., 0] | (b[..., 1] << 8) | (b[..., 2] << 16)
        v = (v ^ 0x800000) - 0x800000  # sign-extend the 24-bit two's complement value
        return v * 2.0**-23
    return block * 2.0 ** -(bits - 1)


def write_wav(path: str | os.PathLike, recording: Recording, *, bits: int = 32,
              sample_format: str = "float", full_scale: float | None = None,
              extensible: bool | None = None) -> Path:
    """Write a recording as a WAV file.

    Parameters
    ----------
    path : str or path-like
    recording : Recording
        All channels must have the same number of samples; the sample rate must be
        a whole number of Hz (WAV stores it as an integer).
    bits : int, keyword-only
        32 or 64 for float; 8, 16, 24 or 32 for integer PCM.
    sample_format : {"float", "int"}, keyword-only
        IEEE float (samples written as they are) or integer PCM.
    full_scale : float, optional, keyword-only
        For integer PCM: the value, in the channels' unit, written as full scale.
        Default: the largest ``Channel.full_scale`` set, else 1.0.  Values beyond
        full scale are clipped with an :class:`~engine.errors.EngineWarning`.
    extensible : bool, optional, keyword-only
        Write ``WAVE_FORMAT_EXTENSIBLE``.  Default: when there are more than 2
        channels or more than 16 integer bits, as [2] recommends.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    InputError
        For a format that cannot be written, unequal channel lengths, a fractional
        sample rate, non-finite samples for integer PCM, or more than 4 GiB of data.
    """
    dest = Path(path)
    src = str(dest)
    kind = {"float": "float", "int": "pcm", "pcm": "pcm"}.get(sample_format)
    if kind is None:
        raise InputError(f"{src}: sample_format {sample_format!r}; expected 'float' or 'int'")
    allowed = _FLOAT_BITS if kind == "float" else _PCM_BITS
    if bits not in allowed:
        raise InputError(f"{src}: cannot write {bits}-bit {sample_format}; expected bits "
                         f"{' or '.join(map(str, allowed))}")
    chans = recording.channels
    if not chans:
        raise InputError(f"{src}: the recording has no channels to write")
    n = int(np.asarray(chans[0].samples).size)
    if n == 0 or any(np.asarray(c.samples).size != n for c in chans):
        raise InputError(f"{src}: every channel must hold the same number (> 0) of samples")
    fs = int(round(recording.fs_hz))
    if abs(fs - recording.fs_hz) > 1e-9 * recording.fs_hz or not 0 < fs < 2**32:
        raise InputError(f"{src}: WAV stores the sample rate in whole Hz; got "
                         f"{recording.fs_hz!r} Hz")
    n_ch = len(chans)
    frame_bytes = n_ch * bits // 8
    data_bytes = n * frame_bytes
    if data_bytes > _MAX_DATA_BYTES:
        raise InputError(f"{src}: {data_bytes} bytes of samples do not fit in a RIFF file "
                         "(4 GiB at most); write fewer samples or channels")
    if kind == "pcm":
        set_fs = [abs(c.full_scale) for c in chans if c.full_scale]
        scale = float(full_scale) if full_scale is not None else max(set_fs, default=1.0)
        if not (np.isfinite(scale) and scale > 0):
            raise InputError(f"{src}: full scale must be a positive number, got {full_scale!r}")
    else:
        scale = 1.0
    use_ext = extensible if extensible is not None else (n_ch > 2 or (kind == "pcm" and bits > 16))
    header = _header(kind, bits, n_ch, fs, n, data_bytes, use_ext)
    clipped = 0
    with open(dest, "wb") as f:
        f.write(header)
        for start in range(0, n, _BLOCK_FRAMES):
            stop = min(start + _BLOCK_FRAMES, n)
            block = np.stack([np.asarray(c.samples[start:stop], dtype=np.float64)
                              for c in chans], axis=1)
            payload, n_clip = _encode(block, kind, bits, scale, src)
            clipped += n_clip
            f.write(payload)
        if data_bytes & 1:
            f.write(b"\x00")
    if clipped:
        warnings.warn(f"{src}: {clipped} samples beyond full scale ±{scale:g} were clipped "
                      f"to the {bits}-bit range", EngineWarning, stacklevel=2)
    return dest


def _header(kind: str, bits: int, n_ch: int, fs: int, n: int, data_bytes: int,
            use_ext: bool) -> bytes:
    frame_bytes = n_ch * bits // 8
    tag = WAVE_FORMAT_IEEE_FLOAT if kind == "float" else WAVE_FORMAT_PCM
    common = (n_ch, fs, fs * frame_bytes, frame_bytes, bits)
    if use_ext:
        mask = (1 << n_ch) - 1 if n_ch <= 18 else 0  # speaker positions in order [2]
        fmt = (struct.pack("<HHIIHHHHI", WAVE_FORMAT_EXTENSIBLE, *common, 22, bits, mask)
               + struct.pack("<H", tag) + _GUID_TAIL)
    elif kind == "float":
        fmt = struct.pack("<HHIIHHH", tag, *common, 0)
    else:
        fmt = struct.pack("<HHIIHH", tag, *common)
    chunks = b"fmt " + struct.pack("<I", len(fmt)) + fmt
    if kind == "float" or use_ext:
        chunks += b"fact" + struct.pack("<II", 4, n)  # required for non-PCM formats [1]
    riff_size = 4 + len(chunks) + 8 + data_bytes + (data_bytes & 1)
    return (b"RIFF" + struct.pack("<I", riff_size) + b"WAVE" + chunks
            + b"data" + struct.pack("<I", data_bytes))


def _encode(block: np.ndarray, kind: str, bits: int, scale: float, src: str
            ) -> tuple[bytes, int]:
    """One block of float64 frames to WAV bytes; returns the bytes and samples clipped."""
    if kind == "float":
        return block.astype("<f4" if bits == 32 else "<f8").tobytes(), 0
    if not np.isfinite(block).all():
        raise InputError(f"{src}: NaN or infinite samples cannot be written as integer PCM")
    half = 2.0 ** (bits - 1)
    q = np.rint(block * (half / scale))
    n_clip = int(np.count_nonzero((q > half - 1) | (q < -half)))
    np.clip(q, -half, half - 1, out=q)
    if bits == 8:
        return (q + 128.0).astype(np.uint8).tobytes(), n_clip
    if bits == 24:
        packed = q.astype("<i4").view(np.uint8).reshape(q.shape + (4,))[..., :3]
        return packed.tobytes(), n_clip
    return q.astype("<i2" if bits == 16 else "<i4").tobytes(), n_clip
