"""Checking an archive end to end, and rebuilding its catalogue from the run files."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING

from ..errors import ArchiveError, InputError
from .catalogue import Catalogue, row_from_attrs, rows_equal
from .plant import read_plant
from .runfile import info_from, open_run, verify_samples
from .schema import CATALOGUE_FILE, PLANT_FILE, PREV_SUFFIX

if TYPE_CHECKING:
    from .store import Archive


@dataclass(frozen=True)
class Problem:
    """Something wrong in an archive: the file (relative to the archive) and what."""

    path: str
    message: str

    def __str__(self) -> str:
        return f"{self.path}: {self.message}"

    def as_dict(self) -> dict:
        return {"path": self.path, "problem": self.message}


@dataclass(frozen=True)
class RebuildResult:
    """Rows written to the new catalogue, and the run files that could not be read."""

    rows: int
    problems: list[Problem]


def check_archive(arc: Archive) -> list[Problem]:
    """Verify an archive without changing anything.

    Checks that ``plant.h5`` opens, that ``catalogue.h5`` opens, and for every run file:
    it opens, its required attributes and datasets are there, every channel's samples
    match their SHA-256, the root checksum and the run id agree, the file sits in its
    point's folder under its run id, its point is in the asset tree, and its catalogue
    row holds the same values.  Every catalogue row must have its run file.

    A run file that ``catalogue.h5`` does not list yet (a writer stopped between the
    run's rename and the catalogue's rewrite) is not a problem: opening adds it.

    Returns
    -------
    list of Problem
        Empty when everything is in order.
    """
    problems: list[Problem] = []
    root = arc.path
    try:
        read_plant(root / PLANT_FILE)
    except ArchiveError as exc:
        problems.append(Problem(PLANT_FILE, f"cannot be read ({exc}); the archive falls back "
                                            f"on {PLANT_FILE}{PREV_SUFFIX}"))
    try:
        Catalogue.read(root / CATALOGUE_FILE)
    except ArchiveError as exc:
        problems.append(Problem(CATALOGUE_FILE, f"cannot be read ({exc}); run rebuild"))
    keys = {p.key: p for p in arc.plant.points()}
    cat = arc._catalogue
    files = arc.run_files()
    for rid, paths in sorted(files.items()):
        if len(paths) > 1:
            problems.append(Problem(paths[0], f"run {rid} is stored more than once: "
                                              + ", ".join(paths)))
        for rel in paths:
            problems.extend(_check_run_file(arc, rel, rid, keys, cat))
    seen: set[str] = set()
    ids = cat.columns["run_id"]
    for i, raw in enumerate(ids.tolist()):
        rid = raw.decode("ascii")
        if rid in seen:
            problems.append(Problem(CATALOGUE_FILE, f"run {rid} is listed more than once"))
        seen.add(rid)
        row = cat.row(i)
        if rid not in files or row.path not in files[rid]:
            problems.append(Problem(CATALOGUE_FILE, f"run {rid} is listed at {row.path}, "
                                                    "but that file does not exist"))
    return problems


def _check_run_file(arc: Archive, rel: str, rid: str, keys: dict, cat: Catalogue
                    ) -> list[Problem]:
    path = arc.path / rel
    out: list[Problem] = []
    try:
        f = open_run(path)
    except ArchiveError as exc:
        return [Problem(rel, str(exc).removeprefix(f"{path}: "))]
    with f:
        try:
            info = info_from(f, str(path))
        except (ArchiveError, InputError, KeyError, ValueError, OSError) as exc:
            return [Problem(rel, str(exc).removeprefix(f"{path}: "))]
        out.extend(Problem(rel, p) for p in verify_samples(f, info))
        if info.run_id != rid:
            out.append(Problem(rel, f"file name says run {rid}, the file says {info.run_id}"))
        folder = rel.split("/")[1]
        if info.point_key != folder:
            out.append(Problem(rel, f"the run belongs to folder {info.point_key!r}, "
                                    f"not {folder!r}"))
        point = keys.get(folder)
        if point is None:
            out.append(Problem(rel, f"folder {folder!r} is not the folder of any point in "
                                    "the asset tree"))
        elif point.path != info.point:
            out.append(Problem(rel, f"the run names point {info.point!r}, the folder "
                                    f"belongs to {point.path!r}"))
        stored = cat.get(rid)
        if stored is None:
            out.append(Problem(rel, "has no catalogue row (it could not be read on open)"))
        else:
            expected = row_from_attrs(info.attrs, info.summary, info.quality_state, rel)
            differ = rows_equal(asdict(stored), expected) if stored.path == rel else []
            if differ:
                out.append(Problem(rel, "its catalogue row differs in " + ", ".join(differ)
                                   + "; run rebuild"))
    return out


def rebuild_catalogue(arc: Archive) -> RebuildResult:
    """Write a new ``catalogue.h5`` from the run files (the truth) and use it.

    Reads only the attributes of each run file, not the samples.  Rows are ordered by
    time imported, then run id.  Run files that cannot be read are left out and listed.
    """
    rows, problems = [], []
    for rid, paths in sorted(arc.run_files().items()):
        for rel in paths[:1]:
            try:
                rows.append(arc._row_from_file(rel))
            except (ArchiveError, KeyError, ValueError, OSError) as exc:
                problems.append(Problem(rel, str(exc)))
    rows.sort(key=lambda r: (r["imported_s"], r["run_id"]))
    cat = Catalogue()
    cat.extend(rows)
    cat.write(arc.path / CATALOGUE_FILE)
    arc._catalogue = cat
    arc._catalogue_ok = True
    arc._dirty = 0
    return RebuildResult(len(rows), problems)
