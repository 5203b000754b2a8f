"""The resume journal of a batch: ``batch.json`` in the archive folder.

A UTF-8 JSON object, replaced atomically (temporary name, fsync, rename) each time the
batch has written the archive's value table::

    {"format": "shaftwatch-batch-journal", "version": 1,
     "digest": "<16 hex digits of the batch's parameters>",
     "parameters": {"what": "analyse", "points": [...] or null, "runs": 2000,
                    "settings": {...}},
     "started": "2026-08-03T08:00:00.000000Z", "updated": "...",
     "done": ["<run id>", ...]}

``done`` lists only runs whose results are in the written value table, so a batch
stopped at any moment (cancel, Ctrl-C, crash, power cut) continues where it stopped
when the same command runs again: same parameters give the same digest, and the runs
listed are not looked at again.  A journal of other parameters is replaced; a batch
that finishes removes its journal.  Only the writer (who holds the lock) touches it.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from .archive.safety import commit
from .archive.schema import TMP_SUFFIX, iso_utc, now_utc

JOURNAL_FILE = "batch.json"
JOURNAL_FORMAT = "shaftwatch-batch-journal"
JOURNAL_VERSION = 1


def parameters_digest(parameters: dict) -> str:
    """16 hex digits of the SHA-256 of the parameters' canonical JSON."""
    text = json.dumps(parameters, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


class Journal:
    """The runs a batch has done so far (see the module notes).

    Use :meth:`start`; then :meth:`add` the runs written, :meth:`save` after every
    write of the value table, :meth:`remove` when the batch is finished.
    """

    def __init__(self, folder: Path, digest: str, parameters: dict,
                 done: list[str] | None = None, started: str | None = None):
        self.path = Path(folder) / JOURNAL_FILE
        self.digest = digest
        self.parameters = parameters
        self.done: list[str] = list(done or [])
        self._seen = set(self.done)
        self.started = started or iso_utc(now_utc())

    @classmethod
    def start(cls, folder: Path, digest: str, parameters: dict, *, resume: bool
              ) -> tuple[Journal, str]:
        """The journal of a batch whose parameters have ``digest`` (see
        :func:`parameters_digest`; ``parameters`` is what the journal shows of them),
        and a note on what was found (``""`` when there was no journal)."""
        path = Path(folder) / JOURNAL_FILE
        if not path.exists():
            return cls(folder, digest, parameters), ""
        try:
            old = json.loads(path.read_text(encoding="utf-8"))
            ok = (isinstance(old, dict) and old.get("format") == JOURNAL_FORMAT
                  and isinstance(old.get("done"), list))
        except (OSError, UnicodeDecodeError, json.JSONDecodeError):
            old, ok = None, False
        if not ok:
            return cls(folder, digest, parameters), (
                f"{path}: not a readable batch journal; it is replaced")
        if not resume:
            return cls(folder, digest, parameters), (
                f"{path}: the journal of a stopped batch is set aside (no resume); "
                "every run is done again")
        if old.get("digest") != digest:
            return cls(folder, digest, parameters), (
                f"{path}: a stopped batch with other parameters "
                f"({json.dumps(old.get('parameters'), sort_keys=True)}) is replaced by "
                "this one")
        done = [str(r) for r in old["done"]]
        return cls(folder, digest, parameters, done, str(old.get("started") or "")), (
            f"{path}: continuing a stopped batch begun {old.get('started')}: "
            f"{len(done)} run(s) already done")

    def __contains__(self, run_id: str) -> bool:
        return run_id in self._seen

    def add(self, run_ids) -> None:
        for r in run_ids:
            if r not in self._seen:
                self._seen.add(r)
                self.done.append(r)

    def save(self) -> None:
        """Write the journal atomically."""
        doc = {"format": JOURNAL_FORMAT, "version": JOURNAL_VERSION, "digest": self.digest,
               "parameters": self.parameters, "started": self.started,
               "updated": iso_utc(now_utc()), "done": self.done}
        tmp = self.path.with_name(self.path.name + TMP_SUFFIX)
        tmp.write_text(json.dumps(doc, indent=0), encoding="utf-8")
        commit(tmp, self.path)

    def remove(self) -> None:
        self.path.unlink(missing_ok=True)
