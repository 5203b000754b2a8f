"""What every view shares: the open archive, the job runner, the preferences, the palette,
and the signals that tell views what the user selected.

One ``AppContext`` per window.  Views read the archive through :meth:`archive` (a reader,
which never blocks a writer) and write through :meth:`writer` (short-lived, so that the
writer lock is held only while something is stored).
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from PySide6.QtCore import QObject, QSettings, Signal
from PySide6.QtGui import QColor

from engine.archive import open_archive

from .jobs import JobRunner

RESOURCES = Path(__file__).resolve().parent.parent / "resources"
ORGANISATION, APPLICATION = "Shaftwatch", "Shaftwatch"


class Palette:
    """Our colours (resources/palette.json) for the current theme, ``light`` or ``dark``."""

    def __init__(self, theme: str = "light"):
        self._data = json.loads((RESOURCES / "palette.json").read_text(encoding="utf-8"))
        self.theme = theme if theme in ("light", "dark") else "light"

    def state(self, state: str) -> QColor:
        entry = self._data["states"].get(state, self._data["states"][""])
        return QColor(entry[self.theme])

    def state_word(self, state: str) -> str:
        return self._data["states"].get(state, self._data["states"][""])["word"]

    def zone(self, zone: str) -> QColor:
        entry = self._data["zones"].get(zone)
        return QColor(entry[self.theme]) if entry else QColor(self.ui("foreground"))

    def trace(self, i: int) -> QColor:
        colours = self._data["traces"][self.theme]
        return QColor(colours[i % len(colours)])

    def marker(self, kind: str) -> QColor:
        return QColor(self._data["markers"].get(kind, self._data["markers"]["order"]))

    def ui(self, name: str) -> QColor:
        return QColor(self._data["theme"][self.theme][name])


class Preferences:
    """Remembered choices (QSettings): last archive, theme, unit system, analysis defaults."""

    def __init__(self, settings: QSettings | None = None):
        self.qs = settings or QSettings(ORGANISATION, APPLICATION)

    def get(self, key: str, default=None, kind=None):
        value = self.qs.value(key, default)
        if kind is bool and isinstance(value, str):
            return value.lower() in ("1", "true", "yes")
        if kind is not None and value is not None:
            try:
                return kind(value)
            except (TypeError, ValueError):
                return default
        return value

    def set(self, key: str, value) -> None:
        self.qs.setValue(key, value)

    @property
    def theme(self) -> str:
        return self.get("view/theme", "light", str)

    @property
    def units(self) -> str:
        """``SI`` (mm/s, g, µm) or ``US`` (in/s, g, mil)."""
        return self.get("view/units", "SI", str)

    @property
    def last_archive(self) -> str:
        return self.get("archive/last", "", str)


class AppContext(QObject):
    """Shared state of one window.

    Signals
    -------
    archive_changed()
        Something was stored (import, keep, plan change); views reload what they show.
    point_selected(str)
        The user picked a point (``Site/Machine/Point``).
    run_selected(str)
        The user picked a run (run id).
    prefs_changed()
        Theme, unit system or analysis defaults changed.
    """

    archive_changed = Signal()
    point_selected = Signal(str)
    run_selected = Signal(str)
    prefs_changed = Signal()

    def __init__(self, archive_path: str | Path, *, prefs: Preferences | None = None,
                 parent: QObject | None = None):
        super().__init__(parent)
        self.archive_path = Path(archive_path)
        self.prefs = prefs or Preferences()
        self.palette = Palette(self.prefs.theme)
        self.jobs = JobRunner(self)
        self._reader = None
        self.point: str | None = None
        self.run_id: str | None = None

    def archive(self):
        """The archive opened for reading (opened once, reloaded after each change)."""
        if self._reader is None:
            self._reader = open_archive(self.archive_path, mode="r")
        return self._reader

    def reload(self) -> None:
        """Read the archive again (after another process or a job wrote to it)."""
        if self._reader is not None:
            self._reader.reload()
        self.archive_changed.emit()

    @contextmanager
    def writer(self, command: str = "shaftwatch-gui") -> Iterator:
        """The archive opened for writing, closed (and the lock released) on exit."""
        with open_archive(self.archive_path, mode="w", command=command) as arc:
            yield arc

    def select_point(self, path: str | None) -> None:
        self.point = path
        self.run_id = None
        if path:
            self.point_selected.emit(path)

    def select_run(self, run_id: str | None) -> None:
        self.run_id = run_id
        if run_id:
            self.run_selected.emit(run_id)

    def set_theme(self, theme: str) -> None:
        self.prefs.set("view/theme", theme)
        self.palette = Palette(theme)
        self.prefs_changed.emit()

    def set_units(self, system: str) -> None:
        self.prefs.set("view/units", system)
        self.prefs_changed.emit()

    def close(self) -> None:
        self.jobs.stop_all()
        if self._reader is not None:
            self._reader.close()
            self._reader = None
