"""Run files: one HDF5 file per run, written once and never changed.

Layout (see docs/archive-schema.md): root attributes with the run's metadata,
``/channels/<i>/samples`` (float64, chunked, shuffle + deflate), ``/quality`` (one
compound row per data-quality finding) and ``/summary`` (the overall levels as
attributes).

Checksums: each samples dataset carries ``sha256``, the SHA-256 (FIPS 180-4) of its
values as little-endian float64 bytes; the root ``sha256`` is the SHA-256 of the text
``"<sample rate repr>\\n<channel count>\\n<digest 0>\\n<digest 1>..."``, and the run id is
its first 20 hex digits.  The run id thus covers the sample rate, the channel count
and every sample, and each channel can be hashed on its own while it streams in.

Chunks are compressed by Shaftwatch itself and stored with ``write_direct_chunk``: each
is a standard zlib stream of the shuffled bytes, which HDF5's shuffle and deflate
filters read back (any HDF5 tool decodes them).  It is made faster than HDF5's own
filter would: zlib runs with its run-length strategy (``Z_RLE``, about 2.5 times faster
than the default strategy on shuffled float64 and no larger), byte planes of nearly
random bytes are stored uncoded, and chunks are coded in worker threads (zlib releases
the GIL; every HDF5 call stays in the calling thread).
"""

from __future__ import annotations

import hashlib
import math
import os
import zlib
from collections import deque
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

import h5py
import numpy as np

from ..errors import ArchiveError
from ..recording import Channel, QualityFinding, Recording
from ..units import quantity_of
from .schema import (CREATED_BY, SCHEMA_VERSION, iso_utc, parse_time, read_attrs,
                     stored_version, text)

#: Samples per chunk of a samples dataset (1 MiB of float64).
CHUNK_SAMPLES = 1 << 17
#: Deflate level recorded in the dataset's filter (used by any later HDF5 writer).
DEFLATE_LEVEL = 4
#: Overall values of ``/summary`` and their units.
SUMMARY_UNITS = {
    "velocity_rms_mm_s": "mm/s RMS",
    "velocity_band_hz": "Hz (low, high)",
    "acceleration_rms_g": "g RMS",
    "acceleration_peak_g": "g (0-peak)",
    "displacement_pp_um": "µm peak-to-peak",
    "crest_factor": "1 (peak / RMS of acceleration)",
    "kurtosis": "1 (Pearson; 3 for Gaussian noise)",
    "skewness": "1",
}
SUMMARY_VALUES = tuple(k for k in SUMMARY_UNITS if k != "velocity_band_hz")
#: Root attributes every run file must have.
REQUIRED_ATTRS = ("run_id", "point", "point_key", "taken", "imported_at", "rpm", "source",
                  "notes", "tach_channel", "sha256", "schema_version", "sample_rate_hz",
                  "n_channels", "n_samples")
_QUALITY_DTYPE = np.dtype([("code", h5py.string_dtype()), ("severity", h5py.string_dtype()),
                           ("message", h5py.string_dtype()), ("channel", "<i4")])
_HASH_BLOCK = 1 << 20


def channel_digest(samples: np.ndarray) -> str:
    """SHA-256 (hex) of samples as little-endian float64 bytes, hashed in blocks."""
    h = hashlib.sha256()
    x = np.asarray(samples)
    for start in range(0, x.size, _HASH_BLOCK):
        h.update(np.ascontiguousarray(x[start:start + _HASH_BLOCK], dtype="<f8"))
    return h.hexdigest()


def run_digest(fs_hz: float, digests: list[str]) -> str:
    """Root checksum of a run from its sample rate and channel digests (module notes)."""
    material = f"{float(fs_hz)!r}\n{len(digests)}\n" + "\n".join(digests)
    return hashlib.sha256(material.encode("ascii")).hexdigest()


def run_id_of(digest: str) -> str:
    """The run id: the first 20 hex digits of the root checksum."""
    return digest[:20]


#: Byte planes whose sampled entropy exceeds this (bits per byte) are stored, not coded.
STORED_ENTROPY_BITS = 7.9
_ZLIB_HEADER = b"\x78\x01"  # deflate, 32 KiB window, FCHECK so that 0x7801 % 31 == 0
_FINAL_EMPTY_STORED = b"\x01\x00\x00\xff\xff"


def _entropy_bits(plane: np.ndarray) -> float:
    """Shannon entropy of a byte plane in bits per byte, from every 16th byte."""
    sample = plane[::16]
    counts = np.bincount(sample, minlength=256)
    p = counts[counts > 0] / sample.size
    return float(-(p * np.log2(p)).sum())


def _stored(data: memoryview) -> list[bytes]:
    """Deflate stored blocks (RFC 1951 §3.2.4) holding ``data``, none of them final."""
    out = []
    for start in range(0, len(data), 0xFFFF):
        part = data[start:start + 0xFFFF]
        n = len(part)
        out.append(b"\x00" + n.to_bytes(2, "little") + (n ^ 0xFFFF).to_bytes(2, "little"))
        out.append(bytes(part))
    return out


def encode_chunk(chunk: np.ndarray, chunk_samples: int = CHUNK_SAMPLES) -> bytes:
    """One chunk as HDF5's shuffle + deflate filters store it (zero-padded to full size).

    The eight byte planes of the float64 samples (the shuffle filter's layout) are
    coded into one zlib stream (RFC 1950): planes that compress go through deflate with
    zlib's run-length strategy, planes of nearly random bytes (the low mantissa bytes
    of noisy signals, which deflate cannot shrink) go in as stored blocks.  Every
    inflater reads the result.
    """
    x = np.ascontiguousarray(chunk, dtype="<f8")
    if x.size < chunk_samples:
        x = np.concatenate([x, np.zeros(chunk_samples - x.size, "<f8")])
    planes = np.ascontiguousarray(x.view(np.uint8).reshape(-1, 8).T)
    flat = memoryview(planes).cast("B")
    n = x.size
    out = [_ZLIB_HEADER]
    k = 0
    while k < 8:
        store = _entropy_bits(planes[k]) > STORED_ENTROPY_BITS
        j = k + 1
        while j < 8 and (_entropy_bits(planes[j]) > STORED_ENTROPY_BITS) == store:
            j += 1
        segment = flat[k * n:j * n]
        if store:
            out.extend(_stored(segment))
        else:
            co = zlib.compressobj(DEFLATE_LEVEL, zlib.DEFLATED, -15, 9, zlib.Z_RLE)
            out.append(co.compress(segment))
            out.append(co.flush(zlib.Z_FULL_FLUSH))  # byte-aligned, no final block
        k = j
    out.append(_FINAL_EMPTY_STORED)
    out.append(zlib.adler32(flat).to_bytes(4, "big"))
    return b"".join(out)


class ChunkEncoder:
    """Worker threads that compress chunks; one per archive writer (closed with it)."""

    def __init__(self, workers: int | None = None):
        workers = workers or min(2, os.cpu_count() or 1)
        self.workers = workers
        self._pool = ThreadPoolExecutor(workers, thread_name_prefix="shaftwatch-deflate") \
            if workers > 1 else None

    def submit(self, chunk: np.ndarray, chunk_samples: int) -> Future:
        if self._pool is None:
            done: Future = Future()
            done.set_result(encode_chunk(chunk, chunk_samples))
            return done
        return self._pool.submit(encode_chunk, chunk, chunk_samples)

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None


class _ChannelSink:
    """Appends one channel's samples chunk by chunk, hashing them in order."""

    def __init__(self, dset: h5py.Dataset, writer: RunWriter, chunk_samples: int):
        self.dset, self.writer, self.chunk = dset, writer, chunk_samples
        self.hash = hashlib.sha256()
        self.pending: list[np.ndarray] = []
        self.pending_n = 0
        self.offset = 0

    def write(self, block: np.ndarray) -> None:
        block = np.ascontiguousarray(block, dtype="<f8")
        self.hash.update(block)
        self.pending.append(block)
        self.pending_n += block.size
        if self.pending_n >= self.chunk:
            data = np.concatenate(self.pending) if len(self.pending) > 1 else self.pending[0]
            whole = (data.size // self.chunk) * self.chunk
            for start in range(0, whole, self.chunk):
                self._submit(data[start:start + self.chunk])
            rest = data[whole:]
            self.pending = [rest] if rest.size else []
            self.pending_n = rest.size

    def _submit(self, chunk: np.ndarray) -> None:
        self.writer.submit(self, self.offset, chunk)
        self.offset += chunk.size

    def finish(self) -> str:
        if self.pending_n:
            self._submit(np.concatenate(self.pending))
            self.pending, self.pending_n = [], 0
        return self.hash.hexdigest()


class RunWriter:
    """Writes one run file at a temporary path, channel blocks in time order.

    Parameters
    ----------
    tmp : Path
        Where to write (the caller renames it when :meth:`finish` returns).
    fs_hz : float
        Sample rate, Hz.
    n_samples : int
        Samples per channel.
    channels : list of Channel
        Channel metadata (their ``samples`` are not used).
    encoder : ChunkEncoder
    """

    def __init__(self, tmp: Path, *, fs_hz: float, n_samples: int, channels: list[Channel],
                 encoder: ChunkEncoder):
        self.tmp = tmp
        self.fs_hz = float(fs_hz)
        self.f = h5py.File(tmp, "w", locking=False)
        chunk = max(1, min(CHUNK_SAMPLES, n_samples))
        self.encoder = encoder
        # Chunks being compressed, oldest first, shared by all channels so that the
        # workers always have the next chunks to code while this thread reads on.
        self.inflight: deque[tuple[_ChannelSink, int, Future]] = deque()
        self.max_inflight = 4 * encoder.workers
        self.sinks = []
        try:
            g = self.f.create_group("channels")
            for i, ch in enumerate(channels):
                ds = g.create_group(str(i)).create_dataset(
                    "samples", shape=(n_samples,), dtype="<f8", chunks=(chunk,),
                    compression="gzip", compression_opts=DEFLATE_LEVEL, shuffle=True)
                a = ds.attrs
                a["unit"] = ch.unit
                a["quantity"] = quantity_of(ch.unit)
                a["name"] = ch.name or ""
                a["direction"] = ch.direction or ""
                a["sensitivity_v_per_unit"] = np.float64(
                    math.nan if ch.sensitivity_v_per_unit is None else ch.sensitivity_v_per_unit)
                a["full_scale"] = np.float64(math.nan if ch.full_scale is None else ch.full_scale)
                a["sample_rate_hz"] = np.float64(self.fs_hz)
                a["t0_s"] = np.float64(0.0)
                self.sinks.append(_ChannelSink(ds, self, chunk))
        except BaseException:
            self.abort()
            raise

    def write(self, blocks) -> None:
        """Append the next block of every channel (a sequence of 1-D arrays, same length)."""
        for sink, block in zip(self.sinks, blocks):
            sink.write(block)

    def submit(self, sink: _ChannelSink, offset: int, chunk: np.ndarray) -> None:
        self.inflight.append((sink, offset, self.encoder.submit(chunk, sink.chunk)))
        while len(self.inflight) > self.max_inflight:
            self._drain_one()

    def _drain_one(self) -> None:
        sink, offset, fut = self.inflight.popleft()
        sink.dset.id.write_direct_chunk((offset,), fut.result())

    def digests(self) -> list[str]:
        """Finish the samples and return each channel's SHA-256."""
        out = [sink.finish() for sink in self.sinks]
        while self.inflight:
            self._drain_one()
        for sink, d in zip(self.sinks, out):
            if sink.offset != sink.dset.shape[0]:
                raise ArchiveError(f"{self.tmp}: {sink.offset} samples written to "
                                   f"{sink.dset.name}, {sink.dset.shape[0]} expected")
            sink.dset.attrs["sha256"] = d
        return out

    def finish(self, attrs: dict, quality: list[QualityFinding], summary: dict) -> None:
        """Write the root attributes, ``/quality`` and ``/summary`` and close the file."""
        try:
            for k, v in attrs.items():
                self.f.attrs[k] = v
            rows = np.array([(q.code, q.severity, q.message,
                              -1 if q.channel is None else int(q.channel)) for q in quality],
                            dtype=_QUALITY_DTYPE)
            self.f.create_dataset("quality", data=rows, shape=(len(rows),),
                                  dtype=_QUALITY_DTYPE)
            s = self.f.create_group("summary")
            for k, v in summary.items():
                s.attrs[k] = v
        finally:
            self.f.close()

    def abort(self) -> None:
        """Close and delete the temporary file."""
        try:
            for _, _, fut in self.inflight:
                fut.cancel()
            self.inflight.clear()
            self.f.close()
        finally:
            self.tmp.unlink(missing_ok=True)


def root_attrs(*, run_id: str, digest: str, point: str, point_key: str, taken: datetime,
               taken_source: str, imported_at: datetime, rpm: float | None, source: str,
               notes: str, tach_channel: int | None, fs_hz: float, n_channels: int,
               n_samples: int) -> dict:
    """The root attributes of a run file, as they are written."""
    return {
        "run_id": run_id, "sha256": digest, "point": point, "point_key": point_key,
        "taken": iso_utc(taken), "taken_source": taken_source,
        "imported_at": iso_utc(imported_at),
        "rpm": np.float64(math.nan if rpm is None else rpm), "source": source,
        "notes": notes, "tach_channel": np.int64(-1 if tach_channel is None else tach_channel),
        "schema_version": np.int64(SCHEMA_VERSION), "created_by": CREATED_BY,
        "sample_rate_hz": np.float64(fs_hz), "n_channels": np.int64(n_channels),
        "n_samples": np.int64(n_samples),
    }


@dataclass
class RunInfo:
    """What a run file says about its run (everything but the samples).

    ``taken`` and ``imported_at`` are UTC datetimes; ``rpm`` is rev/min or ``None``;
    ``summary`` holds the overall values (units in :data:`SUMMARY_UNITS`).
    """

    run_id: str
    point: str
    point_key: str
    path: str
    taken: datetime
    taken_source: str
    imported_at: datetime
    rpm: float | None
    source: str
    notes: str
    tach_channel: int | None
    sha256: str
    schema_version: int
    sample_rate_hz: float
    n_channels: int
    n_samples: int
    summary: dict
    quality: list[QualityFinding]
    channels: list[dict] = field(default_factory=list)
    extra: dict = field(default_factory=dict)
    attrs: dict = field(default_factory=dict, repr=False)  # the root attributes as read

    @property
    def quality_state(self) -> str:
        """``"error"``, ``"warning"`` or ``"ok"``: the worst data-quality finding."""
        return worst_quality(q.severity for q in self.quality)

    def as_dict(self) -> dict:
        return {"run_id": self.run_id, "point": self.point, "file": self.path,
                "taken": iso_utc(self.taken), "taken_source": self.taken_source,
                "imported_at": iso_utc(self.imported_at), "rpm": self.rpm,
                "source": self.source, "notes": self.notes,
                "tach_channel": self.tach_channel, "sha256": self.sha256,
                "schema_version": self.schema_version, "sample_rate_hz": self.sample_rate_hz,
                "n_channels": self.n_channels, "n_samples": self.n_samples,
                "duration_s": self.n_samples / self.sample_rate_hz,
                "summary": dict(self.summary), "quality": [q.as_dict() for q in self.quality],
                "quality_state": self.quality_state, "channels": list(self.channels)}


def worst_quality(severities) -> str:
    s = set(severities)
    return "error" if "error" in s else "warning" if "warning" in s else "ok"


def _plain(value):
    if isinstance(value, bytes):
        return value.decode("utf-8")
    if isinstance(value, np.ndarray):
        return [_plain(v) for v in value.tolist()]
    if isinstance(value, np.generic):
        return value.item()
    return value


def open_run(path: Path) -> h5py.File:
    """Open a run file for reading, ArchiveError when it cannot be."""
    try:
        return h5py.File(path, "r", locking=False)
    except (OSError, ValueError) as exc:
        raise ArchiveError(f"{path}: cannot be opened as HDF5 ({exc})") from None


_ROOT_KINDS = {"run_id": str, "sha256": str, "point": str, "point_key": str, "taken": str,
               "taken_source": str, "imported_at": str, "rpm": float, "source": str,
               "notes": str, "tach_channel": int, "schema_version": int, "created_by": str,
               "sample_rate_hz": float, "n_channels": int, "n_samples": int, "state": str}
_SUMMARY_KINDS = {k: float for k in SUMMARY_VALUES} | {"channel": int, "samples_used": int,
                                                        "note": str}
_CHANNEL_KINDS = {"unit": str, "quantity": str, "name": str, "direction": str,
                  "sensitivity_v_per_unit": float, "full_scale": float,
                  "sample_rate_hz": float, "t0_s": float, "sha256": str}


def info_from(f: h5py.File, path: str) -> RunInfo:
    """The :class:`RunInfo` of an open run file; ArchiveError naming a missing part."""
    stored_version(f, path)
    a, extra = read_attrs(f, _ROOT_KINDS)
    missing = [k for k in REQUIRED_ATTRS if k not in a]
    if missing:
        raise ArchiveError(f"{path}: missing root attribute(s) {', '.join(missing)}")
    absent = [n for n in ("channels", "quality", "summary") if n not in f]
    if absent:
        raise ArchiveError(f"{path}: missing group or dataset {', '.join(absent)}")
    rpm = float(a["rpm"])
    tach = int(a["tach_channel"])
    quality = [QualityFinding(text(r["code"]), text(r["severity"]), text(r["message"]),
                              None if int(r["channel"]) < 0 else int(r["channel"]))
               for r in f["quality"][()]]
    known, more = read_attrs(f["summary"], _SUMMARY_KINDS, ("velocity_band_hz",))
    summary = {k: _plain(v) for k, v in (known | more).items()}
    channels = []
    for i in range(int(a["n_channels"])):
        ds = f.get(f"channels/{i}/samples")
        if ds is None:
            raise ArchiveError(f"{path}: missing dataset channels/{i}/samples")
        known, more = read_attrs(ds, _CHANNEL_KINDS)
        meta = {k: _plain(v) for k, v in (known | more).items()}
        meta["index"] = i
        channels.append(meta)
    return RunInfo(
        run_id=text(a["run_id"]), point=text(a["point"]), point_key=text(a["point_key"]),
        path=path, taken=parse_time(text(a["taken"]), field=f"{path}: taken"),
        taken_source=text(a.get("taken_source", "")),
        imported_at=parse_time(text(a["imported_at"]), field=f"{path}: imported_at"),
        rpm=None if math.isnan(rpm) else rpm, source=text(a["source"]),
        notes=text(a["notes"]), tach_channel=None if tach < 0 else tach,
        sha256=text(a["sha256"]), schema_version=int(a["schema_version"]),
        sample_rate_hz=float(a["sample_rate_hz"]), n_channels=int(a["n_channels"]),
        n_samples=int(a["n_samples"]), summary=summary, quality=quality, channels=channels,
        extra={k: _plain(v) for k, v in extra.items()}, attrs=a)


def read_run_file(path: Path) -> tuple[Recording, RunInfo]:
    """Read a run file into a Recording (samples float64) and its RunInfo."""
    with open_run(path) as f:
        info = info_from(f, str(path))
        channels = []
        try:
            for meta in info.channels:
                x = f[f"channels/{meta['index']}/samples"][()]
                channels.append(Channel(
                    samples=np.asarray(x, dtype=np.float64), unit=meta["unit"],
                    name=meta.get("name", ""), direction=meta.get("direction") or None,
                    sensitivity_v_per_unit=_none_if_nan(meta.get("sensitivity_v_per_unit")),
                    full_scale=_none_if_nan(meta.get("full_scale"))))
        except OSError as exc:
            raise ArchiveError(f"{path}: samples cannot be read ({exc})") from None
    rec = Recording(fs_hz=info.sample_rate_hz, channels=channels, source=str(path),
                    rpm=info.rpm, taken=info.taken, quality=list(info.quality),
                    tach_channel=info.tach_channel)
    return rec, info


def _none_if_nan(v):
    return None if v is None or (isinstance(v, float) and math.isnan(v)) else v


def verify_samples(f: h5py.File, info: RunInfo) -> list[str]:
    """Recompute every checksum of an open run file; a list of what does not match."""
    problems = []
    digests = []
    for meta in info.channels:
        ds = f[f"channels/{meta['index']}/samples"]
        h = hashlib.sha256()
        chunk = ds.chunks[0] if ds.chunks else _HASH_BLOCK
        step = chunk * max(1, _HASH_BLOCK // chunk)  # whole chunks per read
        try:
            for start in range(0, ds.shape[0], step):
                h.update(np.ascontiguousarray(ds[start:start + step], dtype="<f8"))
        except OSError as exc:
            problems.append(f"channel {meta['index']}: samples cannot be read ({exc})")
            digests.append("")
            continue
        d = h.hexdigest()
        digests.append(d)
        if ds.shape[0] != info.n_samples:
            problems.append(f"channel {meta['index']}: {ds.shape[0]} samples, the root "
                            f"attribute n_samples says {info.n_samples}")
        if d != meta.get("sha256"):
            problems.append(f"channel {meta['index']}: samples do not match their sha256 "
                            "(the file is damaged)")
    if not problems:
        root = run_digest(info.sample_rate_hz, digests)
        if root != info.sha256:
            problems.append("the root sha256 does not match the sample rate, channel count "
                            "and channel checksums")
        elif run_id_of(root) != info.run_id:
            problems.append(f"run_id {info.run_id} is not the start of its sha256")
    return problems
