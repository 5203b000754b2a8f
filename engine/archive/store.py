"""The archive of a plant: a folder of HDF5 files, one writer at a time.

>>> with create_archive("demo-works.shaftwatch", plant_name="Demo Works") as arc:  # doctest: +SKIP
...     arc.add_site("Demo Works")
...     arc.add_machine("Demo Works", "P-101", nominal_rpm=1480, iso_group=2)
...     arc.add_point("Demo Works", "P-101", "motor DE H", direction="H", unit="g")
...     arc.import_recording(rec, "Demo Works/P-101/motor DE H")

Layout, crash safety, the lock and versioning are described in docs/archive-schema.md.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import h5py
import numpy as np

from ..errors import ArchiveError, EngineWarning, InputError
from ..recording import Recording
from .catalogue import Catalogue, CatalogueRow, row_from_attrs
from .derived_store import DerivedStore
from .ingest import STREAM_BLOCK_FRAMES, STREAM_LEADING_SAMPLES, ImportResult
from .plant import (
    PointInfo,
    SiteInfo,
    copy_plant,
    edit_add_machine,
    edit_add_point,
    edit_add_site,
    edit_update_machine,
    edit_update_point,
    new_plant,
    read_machine,
    read_plant,
)
from .runfile import ChunkEncoder, RunInfo, info_from, open_run, read_run_file
from .safety import WriterLock, commit_plant
from .setup_store import SetupStore
from .schema import (
    CATALOGUE_FILE,
    PLANT_FILE,
    PREV_SUFFIX,
    RUN_SUFFIX,
    RUNS_DIR,
    SCHEMA_VERSION,
    TMP_SUFFIX,
    NewerSchemaError,
    check_name,
    machine_props,
    migrate,
    parse_time,
    point_key,
    point_props,
    split_point_path,
)


def create_archive(path: str | os.PathLike, *, plant_name: str, command: str | None = None
                   ) -> Archive:
    """Create a new, empty archive folder and open it for writing.

    Parameters
    ----------
    path : path-like
        The folder to create (it may exist if empty), e.g. ``demo-works.shaftwatch``.
    plant_name : str, keyword-only
        Name of the plant, stored in ``plant.h5``.
    command : str, optional, keyword-only
        What this writer does, shown to anyone who meets the lock.

    Returns
    -------
    Archive
        Open in mode ``"w"``; use it as a context manager.
    """
    folder = Path(path)
    if folder.exists() and (not folder.is_dir() or any(folder.iterdir())):
        raise ArchiveError(f"{folder}: already exists and is not an empty folder; "
                           "choose a new archive name")
    folder.mkdir(parents=True, exist_ok=True)
    (folder / RUNS_DIR).mkdir(exist_ok=True)
    lock = WriterLock(folder, command or "create archive")
    lock.acquire()
    try:
        tmp = folder / (PLANT_FILE + TMP_SUFFIX)
        with h5py.File(tmp, "w", locking=False) as f:
            new_plant(f, plant_name)
        commit_plant(folder, tmp, keep_prev=False)
        Catalogue().write(folder / CATALOGUE_FILE)
    except BaseException:
        lock.release()
        raise
    return Archive(folder, mode="w", _lock=lock)


def open_archive(path: str | os.PathLike, *, mode: str = "r", force: bool = False,
                 command: str | None = None) -> Archive:
    """Open an archive folder for reading (``"r"``) or writing (``"w"``, takes the lock).

    Parameters
    ----------
    path : path-like
    mode : {"r", "w"}, keyword-only
    force : bool, keyword-only
        Take over the writer lock even when its owner seems alive (use only when you
        know that writer is gone, e.g. after a crash on another host).
    command : str, optional, keyword-only
        Stored in the lock for whoever meets it (default: this program's command line).

    Raises
    ------
    ArchiveError
        No archive there, another writer holds the lock, the archive was written by a
        newer Shaftwatch, or neither ``plant.h5`` nor ``plant.h5.prev`` can be read.
    """
    folder = Path(path)
    if mode not in ("r", "w"):
        raise InputError(f"{folder}: mode must be 'r' or 'w', got {mode!r}")
    if not folder.is_dir() or not ((folder / PLANT_FILE).exists()
                                   or (folder / (PLANT_FILE + PREV_SUFFIX)).exists()):
        raise ArchiveError(f"{folder}: no Shaftwatch archive there (expected a folder "
                           f"holding {PLANT_FILE})")
    lock = None
    notices: list[str] = []
    if mode == "w":
        lock = WriterLock(folder, command or "")
        notices = lock.acquire(force=force)
    try:
        return Archive(folder, mode=mode, _lock=lock, _notices=notices)
    except BaseException:
        if lock is not None:
            lock.release()
        raise


class Archive(SetupStore, DerivedStore):
    """An open archive.  Create with :func:`create_archive` or :func:`open_archive`.

    Attributes
    ----------
    path : Path
    mode : str
        ``"r"`` or ``"w"``.
    notices : list of str
        What opening found and did (a stale lock taken over, ``plant.h5.prev`` used,
        runs added to the catalogue, an upgrade of the schema); also issued as
        :class:`~engine.errors.EngineWarning`.
    """

    def __init__(self, path: Path, *, mode: str, _lock: WriterLock | None = None,
                 _notices: list[str] | None = None):
        self.path = Path(path)
        self.mode = mode
        self.notices: list[str] = []
        self._lock = _lock
        self._encoder: ChunkEncoder | None = None
        self._dirty = 0
        self._closed = False
        for n in _notices or []:
            self._notice(n)
        if mode == "w":
            self._remove_temporaries()
        self._load()
        if mode == "w":
            if not self._plant_ok:
                self._edit(lambda f: None)
                self._notice(f"{self.path / PLANT_FILE}: restored from {PLANT_FILE}{PREV_SUFFIX}")
            if self.plant.schema_version < SCHEMA_VERSION:
                done: list[str] = []
                self._edit(lambda f: done.extend(migrate(f, str(self.path / PLANT_FILE))),
                           compact=True)
                for n in done:
                    self._notice(n)

    # -- life cycle ---------------------------------------------------------------------
    def __enter__(self) -> Archive:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        """Write the catalogue if runs were added, and release the writer lock."""
        if self._closed:
            return
        try:
            if self.mode == "w":
                self.flush()
        finally:
            self._closed = True
            if self._encoder is not None:
                self._encoder.close()
            if self._lock is not None:
                self._lock.release()

    def _notice(self, text: str) -> None:
        self.notices.append(text)
        warnings.warn(text, EngineWarning, stacklevel=3)

    def _writable(self) -> None:
        if self._closed:
            raise ArchiveError(f"{self.path}: the archive is closed")
        if self.mode != "w":
            raise ArchiveError(f"{self.path}: opened for reading; open it with mode='w' "
                               "to change it")

    def _remove_temporaries(self) -> None:
        """Left-overs of an interrupted writer (only a writer can have made them)."""
        for p in list(self.path.glob("*" + TMP_SUFFIX)):
            p.unlink(missing_ok=True)
        runs = self.path / RUNS_DIR
        if runs.is_dir():
            for p in runs.glob("*/*" + TMP_SUFFIX):
                p.unlink(missing_ok=True)
        for p in (self.path / "results").glob("*/*" + TMP_SUFFIX):
            p.unlink(missing_ok=True)

    def _load(self) -> None:
        plant_file = self.path / PLANT_FILE
        prev = self.path / (PLANT_FILE + PREV_SUFFIX)
        self._plant_ok = True
        self._plant_source = plant_file
        try:
            self.plant = read_plant(plant_file)
        except NewerSchemaError:
            raise
        except ArchiveError as exc:
            if not prev.exists():
                raise
            self.plant = read_plant(prev)
            self._plant_ok = False
            self._plant_source = prev
            self._notice(f"{plant_file} is missing or damaged ({exc}); using "
                         f"{prev.name}, the asset tree before the last edit")
        self._catalogue_ok = True
        try:
            self._catalogue = Catalogue.read(self.path / CATALOGUE_FILE)
        except NewerSchemaError:
            raise
        except ArchiveError as exc:
            self._catalogue = Catalogue()
            self._catalogue_ok = False
            self._notice(f"{exc}; the catalogue is rebuilt from the run files")
        self._merge_run_files()

    def reload(self) -> None:
        """Read the asset tree and the catalogue again (a reader sees a writer's work)."""
        self._load()
        self._reload_derived()

    def _run_keys(self) -> tuple[dict[str, str], bool]:
        """Run id -> point folder of every run file on disk, and whether some run id
        appears in more than one folder."""
        out: dict[str, str] = {}
        runs = self.path / RUNS_DIR
        if not runs.is_dir():
            return out, False
        cut, total = len(RUN_SUFFIX), 0
        for key in os.listdir(runs):
            try:
                ids = [n[:-cut] for n in os.listdir(runs / key) if n.endswith(RUN_SUFFIX)]
            except NotADirectoryError:
                continue
            total += len(ids)
            out.update(dict.fromkeys(ids, key))
        return out, total != len(out)

    def run_files(self) -> dict[str, list[str]]:
        """Every run file on disk: run id -> paths relative to the archive folder (more
        than one path only when the same run is stored twice, which check reports)."""
        keys, repeated = self._run_keys()
        out = {rid: [f"{RUNS_DIR}/{key}/{rid}{RUN_SUFFIX}"] for rid, key in keys.items()}
        if repeated:
            out = {}
            for key in sorted(os.listdir(self.path / RUNS_DIR)):
                folder = self.path / RUNS_DIR / key
                if folder.is_dir():
                    for name in sorted(os.listdir(folder)):
                        if name.endswith(RUN_SUFFIX):
                            out.setdefault(name[:-len(RUN_SUFFIX)], []).append(
                                f"{RUNS_DIR}/{key}/{name}")
        return out

    def _merge_run_files(self) -> None:
        """Add run files that the catalogue does not list (a writer stopped between a
        run's rename and the catalogue's rewrite); a writer saves the result."""
        keys, _ = self._run_keys()
        listed = set(self._catalogue.columns["run_id"].astype("U").tolist())
        added = 0
        for rid in sorted(keys.keys() - listed):
            try:
                self._catalogue.append(self._row_from_file(
                    f"{RUNS_DIR}/{keys[rid]}/{rid}{RUN_SUFFIX}"))
                added += 1
            except ArchiveError as exc:
                self._notice(f"{exc}; the run is left out of the catalogue (see check)")
        if added and self._catalogue_ok:
            self._notice(f"{self.path}: {added} run(s) missing from {CATALOGUE_FILE} "
                         "were added from their run files")
        if self.mode == "w" and (added or not self._catalogue_ok):
            self._catalogue.write(self.path / CATALOGUE_FILE)
            self._catalogue_ok = True

    def _row_from_file(self, rel: str) -> dict:
        path = self.path / rel
        with open_run(path) as f:
            info = info_from(f, str(path))
        return row_from_attrs(info.attrs, info.summary, info.quality_state, rel)

    def flush(self) -> None:
        """Rewrite the catalogue now if runs were added since it was last written."""
        self._writable()
        if self._dirty:
            self._catalogue.write(self.path / CATALOGUE_FILE)
            self._dirty = 0
        self._flush_derived()

    # -- asset tree ---------------------------------------------------------------------
    def _edit(self, change, *, machine: tuple[str, str] | None = None,
              site: SiteInfo | None = None, compact: bool = False) -> None:
        """Apply ``change(h5py.File)`` to a fresh copy of plant.h5 and commit it.

        The in-memory tree is then updated: only the edited ``machine`` (site, tag) is
        read back, a new ``site`` is added as given, and anything else is read anew.
        """
        self._writable()
        tmp = self.path / (PLANT_FILE + TMP_SUFFIX)
        f = copy_plant(self._plant_source, tmp, compact=compact)
        try:
            change(f)
            edited = None if machine is None else read_machine(
                *machine, f[f"sites/{machine[0]}/machines/{machine[1]}"])
        except BaseException:
            f.close()
            tmp.unlink(missing_ok=True)
            raise
        f.close()
        commit_plant(self.path, tmp, keep_prev=self._plant_ok)
        self._plant_ok = True
        self._plant_source = self.path / PLANT_FILE
        if edited is not None:
            self.plant.sites[machine[0]].machines[machine[1]] = edited
        elif site is not None:
            self.plant.sites[site.name] = site
        else:
            self.plant = read_plant(self._plant_source)

    @property
    def plant_name(self) -> str:
        return self.plant.name

    @property
    def schema_version(self) -> int:
        return self.plant.schema_version

    def add_site(self, name: str, *, description: str = "") -> None:
        """Add a site (an area of the plant) to the asset tree."""
        check_name(name, "site")
        self._edit(lambda f: edit_add_site(f, name, description),
                   site=SiteInfo(name, str(description)))

    def add_machine(self, site: str, tag: str, **props) -> None:
        """Add a machine at a site.

        Parameters
        ----------
        site, tag : str
        **props
            ``name``, ``description``, ``nominal_rpm`` (rev/min), ``power_kw`` (kW),
            ``iso_group`` (1 or 2, ISO 20816-3), ``foundation`` ("rigid" or
            "flexible") and ``ratios`` ({shaft: speed / nominal speed}).
        """
        check_name(tag, "machine tag")
        values, ratios = machine_props(props, what=f"machine {site}/{tag}")
        self.plant.site(site)
        self._edit(lambda f: edit_add_machine(f, site, tag, values, ratios), machine=(site, tag))

    def update_machine(self, site: str, tag: str, **props) -> None:
        """Change some properties of a machine (same names as :meth:`add_machine`)."""
        values, ratios = machine_props(props, what=f"machine {site}/{tag}")
        self.plant.machine(site, tag)
        self._edit(lambda f: edit_update_machine(f, site, tag, values, ratios),
                   machine=(site, tag))

    def add_point(self, site: str, tag: str, name: str, **props) -> PointInfo:
        """Add a measurement point to a machine.

        Parameters
        ----------
        site, tag, name : str
        **props
            ``location``, ``direction`` (H, V, A or R), ``unit`` (of the measured
            quantity, default g), ``sensitivity`` (V per unit, or text like
            "100mV/g"), the analysis settings ``fmax_hz`` (Hz), ``lines``, ``window``,
            ``averages`` and ``overlap`` (fraction), ``channel`` (the channel
            summarised on import) and ``mapping_patterns`` (file-name globs).
        """
        path = f"{site}/{tag}/{name}"
        split_point_path(path)
        self.plant.machine(site, tag)
        values, patterns = point_props(props, what=f"point {path}",
                                       current_unit=props.get("unit") or "g")
        self._check_shaft(site, tag, path, values.get("shaft"))
        key = point_key(site, tag, name, self.plant.keys())
        self._edit(lambda f: edit_add_point(f, path, values, patterns, key), machine=(site, tag))
        return self.plant.point(path)

    def update_point(self, path: str, **props) -> PointInfo:
        """Change some properties of a point (same names as :meth:`add_point`)."""
        current = self.plant.point(path)
        values, patterns = point_props(props, what=f"point {path}",
                                       current_unit=current.props["unit"])
        self._check_shaft(current.site, current.machine, path, values.get("shaft"))
        self._edit(lambda f: edit_update_point(f, path, values, patterns),
                   machine=(current.site, current.machine))
        return self.plant.point(path)

    def point(self, path: str) -> PointInfo:
        """The point ``"Site/Machine/Point"``, or InputError listing what exists."""
        return self.plant.point(path)

    def points(self) -> list[PointInfo]:
        return list(self.plant.points())

    def tree(self) -> list[dict]:
        """Sites → machines → points with their properties, each point with its number
        of runs and its latest run (a catalogue row as a dict, or ``None``)."""
        latest = self._catalogue.latest_by_point()
        pts = self._catalogue.columns["point"]
        names, counts = np.unique(pts, return_counts=True) if pts.size else ([], [])
        count = {n.decode("utf-8"): int(c) for n, c in zip(names, counts)}
        out = []
        for site in self.plant.sites.values():
            d = site.as_dict()
            for m in d["machines"]:
                for p in m["points"]:
                    row = latest.get(p["path"])
                    p["runs"] = count.get(p["path"], 0)
                    p["latest"] = row.as_dict() if row is not None else None
            out.append(d)
        return out

    # -- runs ---------------------------------------------------------------------------
    def _encoder_(self) -> ChunkEncoder:
        if self._encoder is None:
            self._encoder = ChunkEncoder()
        return self._encoder

    def _existing(self, run_id: str) -> ImportResult | None:
        row = self._catalogue.get(run_id)
        if row is None:
            return None
        return ImportResult(run_id, run_id, row.point, row.path)

    def import_recording(self, recording: Recording, point_path: str, *, taken=None,
                         rpm: float | None = None, notes: str = "",
                         tach_channel: int | None = None, channel: int | None = None,
                         source: str | None = None, taken_source: str | None = None
                         ) -> ImportResult:
        """Store a recording as a run of a point (nothing is stored for a duplicate).

        Parameters
        ----------
        recording : Recording
        point_path : str
            ``"Site/Machine/Point"``.
        taken : datetime or ISO-8601 text, optional, keyword-only
            When it was recorded (UTC when naive); default the recording's own time,
            else now.
        rpm : float, optional, keyword-only
            Shaft speed, rev/min (default the recording's).
        notes : str, keyword-only
        tach_channel : int, optional, keyword-only
            Channel holding tachometer pulses (default the recording's).
        channel : int, optional, keyword-only
            Channel whose levels make the summary (default the point's, else the
            first that is not the tachometer).
        source : str, optional, keyword-only
            File name stored with the run (default the name of ``recording.source``).
        taken_source : str, optional, keyword-only
            Where ``taken`` came from, stored beside it (default "given").

        Returns
        -------
        ImportResult
        """
        from .transfer import store_recording

        return store_recording(self, recording, point_path, taken=taken, rpm=rpm, notes=notes,
                               tach_channel=tach_channel, channel=channel, source=source,
                               taken_source=taken_source)

    def import_wav_file(self, path: str | os.PathLike, point_path: str, *,
                        input_unit: str = "g", full_scale: float | None = None,
                        sensitivity=None, taken=None, rpm: float | None = None,
                        notes: str = "", tach_channel: int | None = None,
                        channel: int | None = None, taken_source: str | None = None,
                        block_frames: int = STREAM_BLOCK_FRAMES,
                        leading_samples: int = STREAM_LEADING_SAMPLES) -> ImportResult:
        """Import a WAV file of any size, streaming it block by block.

        The samples and the run id are the same as with
        ``import_recording(read_recording(path, ...))``; the summary and the quality
        checks use the first ``leading_samples`` samples (see :mod:`.ingest`).  Options
        as in :func:`engine.io.read_recording` and :meth:`import_recording`.
        """
        from .transfer import store_wav_file

        return store_wav_file(self, path, point_path, input_unit=input_unit,
                              full_scale=full_scale, sensitivity=sensitivity, taken=taken,
                              rpm=rpm, notes=notes, tach_channel=tach_channel, channel=channel,
                              taken_source=taken_source, block_frames=block_frames,
                              leading_samples=leading_samples)

    def runs(self, point: str | None = None, since=None) -> list[CatalogueRow]:
        """Catalogue rows, in the order taken, of one point and/or since a time.

        ``since`` is a datetime or ISO-8601 text (UTC when naive).
        """
        since_s = None if since is None else parse_time(since, field="since").timestamp()
        if point is not None:
            self.point(point)
        return self._catalogue.rows(self._catalogue.select(point=point, since_s=since_s))

    def resolve_run(self, run_id: str) -> str:
        """The full run id of ``run_id`` or of a unique prefix of at least 6 digits."""
        return self._catalogue.resolve(str(run_id).strip())

    def _run_path(self, run_id: str) -> Path:
        row = self._catalogue.get(self.resolve_run(run_id))
        return self.path / row.path

    def run_info(self, run_id: str) -> RunInfo:
        """A run's metadata, summary and quality findings (samples are not read)."""
        path = self._run_path(run_id)
        with open_run(path) as f:
            return info_from(f, str(path))

    def read_run(self, run_id: str) -> tuple[Recording, RunInfo]:
        """A run's samples as a Recording, and its RunInfo."""
        return read_run_file(self._run_path(run_id))

    def trend(self, point: str, value: str) -> tuple[np.ndarray, np.ndarray]:
        """One summary value of one point over time, from the catalogue only.

        Returns
        -------
        (taken_s, values) : ndarray, ndarray
            Times taken in seconds since 1970-01-01 UTC (ascending) and the values,
            in the column's unit (e.g. ``velocity_rms_mm_s`` in mm/s RMS).
        """
        self.point(point)
        return self._catalogue.trend(point, value)

    def latest_by_point(self) -> dict[str, CatalogueRow]:
        """The last run taken at each point that has runs."""
        return self._catalogue.latest_by_point()

    def export_run(self, run_id: str, path: str | os.PathLike, *, wav_bits: int = 32
                   ) -> tuple[Path, Path]:
        """Write a run as WAV (float, ``wav_bits`` 32 or 64) or CSV/TSV, with a side-car
        ``.json`` of its metadata next to it.

        Returns
        -------
        (data file, side-car file)
        """
        from .transfer import export_run

        return export_run(self, run_id, path, wav_bits=wav_bits)

    def check(self):
        """Verify every file; a list of :class:`~engine.archive.integrity.Problem`."""
        from .integrity import check_archive

        return check_archive(self)

    def rebuild(self):
        """Rewrite the catalogue from the run files; see :func:`.integrity.rebuild_catalogue`."""
        from .integrity import rebuild_catalogue

        self._writable()
        out = rebuild_catalogue(self)
        self._reload_derived()
        self._sync_catalogue_states()
        return out
