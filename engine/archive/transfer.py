"""Moving recordings into an archive and runs out of it (used by :class:`.store.Archive`).

The functions take the open archive as first argument; the Archive methods of the same
names document the options.
"""

from __future__ import annotations

import json
import math
import os
import uuid
from concurrent.futures import ThreadPoolExecutor
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ArchiveError, InputError
from ..io import write_csv, write_wav
from ..recording import Recording
from .catalogue import row_from_attrs
from .ingest import (
    ImportResult,
    StreamedWav,
    check_rpm,
    check_tach,
    merged_quality,
    resolve_taken,
    summary_attrs,
    summary_channel,
)
from .plant import PointInfo
from .runfile import RunWriter, channel_digest, root_attrs, run_digest, run_id_of, worst_quality
from .safety import commit
from .schema import RUN_SUFFIX, RUNS_DIR, TMP_SUFFIX, now_utc

if TYPE_CHECKING:
    from .store import Archive

#: Runs imported between two rewrites of the catalogue within a batch.
CATALOGUE_EVERY = 50


def store_recording(arc: Archive, recording: Recording, point_path: str, *, taken=None,
                    rpm: float | None = None, notes: str = "", tach_channel: int | None = None,
                    channel: int | None = None, source: str | None = None,
                    taken_source: str | None = None) -> ImportResult:
    """Store a recording as a run (see :meth:`.store.Archive.import_recording`)."""
    arc._writable()
    point = arc.point(point_path)
    src = recording.source or point.path
    if not recording.channels:
        raise InputError(f"{src}: the recording has no channels")
    n = recording.n_samples
    if any(c.samples.size != n or c.samples.ndim != 1 for c in recording.channels):
        raise InputError(f"{src}: every channel must be 1-D with the same number of samples")
    digests = [channel_digest(c.samples) for c in recording.channels]
    digest = run_digest(recording.fs_hz, digests)
    run_id = run_id_of(digest)
    dup = arc._existing(run_id)
    if dup is not None:
        return dup
    rpm = check_rpm(rpm if rpm is not None else recording.rpm, src)
    tach = check_tach(tach_channel if tach_channel is not None else recording.tach_channel,
                      len(recording.channels), src)
    ch = summary_channel(len(recording.channels), tach,
                         channel if channel is not None else point.props["channel"])
    summary = summary_attrs(recording.channels[ch].samples, recording.fs_hz,
                            recording.channels[ch].unit, rpm=rpm, channel=ch, source=src)
    quality = merged_quality(recording)
    moment, how = resolve_taken(taken, recording.taken, taken_source)
    attrs = root_attrs(run_id=run_id, digest=digest, point=point.path, point_key=point.key,
                       taken=moment, taken_source=how, imported_at=now_utc(), rpm=rpm,
                       source=source if source is not None else Path(recording.source).name,
                       notes=str(notes), tach_channel=tach, fs_hz=recording.fs_hz,
                       n_channels=len(recording.channels), n_samples=n)
    folder = arc.path / RUNS_DIR / point.key
    folder.mkdir(parents=True, exist_ok=True)
    tmp = folder / f"{run_id}{RUN_SUFFIX}{TMP_SUFFIX}"
    writer = RunWriter(tmp, fs_hz=recording.fs_hz, n_samples=n,
                       channels=recording.channels, encoder=arc._encoder_())
    try:
        writer.write([c.samples for c in recording.channels])
        if writer.digests() != digests:
            raise ArchiveError(f"{tmp}: samples changed while they were written")
        writer.finish(attrs, quality, summary)
    except BaseException:
        writer.abort()
        raise
    return _commit_run(arc, tmp, folder, run_id, attrs, summary, quality, point)


def store_wav_file(arc: Archive, path: str | os.PathLike, point_path: str, *,
                   input_unit: str, full_scale: float | None, sensitivity, taken,
                   rpm: float | None, notes: str, tach_channel: int | None,
                   channel: int | None, taken_source: str | None, block_frames: int,
                   leading_samples: int) -> ImportResult:
    """Stream a WAV file into a run (see :meth:`.store.Archive.import_wav_file`)."""
    arc._writable()
    point = arc.point(point_path)
    wav = StreamedWav(path, input_unit=input_unit, full_scale=full_scale,
                      sensitivity=sensitivity)
    src, n, n_ch = wav.source, wav.n_samples, len(wav.channels)
    if n < 1:
        raise InputError(f"{src}: the WAV file holds no samples")
    rpm = check_rpm(rpm, src)
    tach = check_tach(tach_channel, n_ch, src)
    ch = summary_channel(n_ch, tach, channel if channel is not None else point.props["channel"])
    keep = max(1, min(n, leading_samples, (1 << 22) // max(1, n_ch)))
    folder = arc.path / RUNS_DIR / point.key
    folder.mkdir(parents=True, exist_ok=True)
    tmp = folder / f"incoming-{uuid.uuid4().hex}{RUN_SUFFIX}{TMP_SUFFIX}"
    writer = RunWriter(tmp, fs_hz=wav.fs_hz, n_samples=n, channels=wav.channels,
                       encoder=arc._encoder_())
    # The summary of the leading samples is computed in a thread of its own as soon
    # as they are in, alongside the rest of the file (numpy and scipy.fft release
    # the GIL); every HDF5 call stays in this thread.
    side = ThreadPoolExecutor(1, thread_name_prefix="shaftwatch-summary")
    pending_summary = None
    try:
        leading = [np.empty(keep) for _ in range(n_ch)]
        non_finite = [0] * n_ch
        for start, cols in wav.blocks(block_frames):
            writer.write(cols)
            frames = cols[0].size
            if start < keep:
                stop = min(keep, start + frames)
                for c in range(n_ch):
                    leading[c][start:stop] = cols[c][:stop - start]
                if stop == keep:
                    pending_summary = side.submit(
                        summary_attrs, leading[ch], wav.fs_hz, wav.channels[ch].unit,
                        rpm=rpm, channel=ch, source=src, samples_used=keep)
            for c in range(n_ch):
                non_finite[c] += int(frames - np.count_nonzero(np.isfinite(cols[c])))
        digests = writer.digests()
        digest = run_digest(wav.fs_hz, digests)
        run_id = run_id_of(digest)
        dup = arc._existing(run_id)
        if dup is not None:
            writer.abort()
            return dup
        quality = wav.quality(leading, non_finite)
        if pending_summary is None:
            raise InputError(f"{src}: the file holds fewer frames than its header says")
        summary = pending_summary.result()
        moment, how = resolve_taken(taken, None, taken_source)
        attrs = root_attrs(run_id=run_id, digest=digest, point=point.path,
                           point_key=point.key, taken=moment, taken_source=how,
                           imported_at=now_utc(), rpm=rpm, source=wav.path.name,
                           notes=str(notes), tach_channel=tach, fs_hz=wav.fs_hz,
                           n_channels=n_ch, n_samples=n)
        writer.finish(attrs, quality, summary)
    except BaseException:
        writer.abort()
        raise
    finally:
        side.shutdown(wait=True)
    return _commit_run(arc, tmp, folder, run_id, attrs, summary, quality, point)


def _commit_run(arc: Archive, tmp: Path, folder: Path, run_id: str, attrs: dict, summary: dict,
                quality, point: PointInfo) -> ImportResult:
    final = folder / f"{run_id}{RUN_SUFFIX}"
    commit(tmp, final)
    rel = f"{RUNS_DIR}/{point.key}/{final.name}"
    arc._catalogue.append(row_from_attrs(attrs, summary,
                                          worst_quality(q.severity for q in quality), rel))
    arc._dirty += 1
    if arc._dirty >= CATALOGUE_EVERY:
        arc.flush()
    return ImportResult(run_id, None, point.path, rel)


def export_run(arc: Archive, run_id: str, path: str | os.PathLike, *, wav_bits: int = 32
               ) -> tuple[Path, Path]:
    """Write a run as WAV or CSV/TSV with a JSON side-car (see
    :meth:`.store.Archive.export_run`)."""
    rec, info = arc.read_run(run_id)
    dest = Path(path)
    suffix = dest.suffix.lower()
    if suffix == ".wav":
        write_wav(dest, rec, bits=wav_bits, sample_format="float")
    elif suffix in (".csv", ".tsv", ".txt"):
        write_csv(dest, rec, delimiter="\t" if suffix == ".tsv" else ",")
    else:
        raise InputError(f"{dest}: export writes .wav, .csv or .tsv files")
    side = dest.with_suffix(".json")
    meta = info.as_dict()
    meta.update(exported_file=dest.name, exported_at=now_utc().isoformat(),
                archive=str(arc.path))
    side.write_text(json.dumps(_json_safe(meta), indent=1, allow_nan=False) + "\n",
                    encoding="utf-8")
    return dest, side


def _json_safe(obj):
    if isinstance(obj, dict):
        return {str(k): _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    if isinstance(obj, (float, np.floating)):
        return float(obj) if math.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, datetime):
        return obj.isoformat()
    return obj
