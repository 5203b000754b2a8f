"""The writer archive as a batch sees it: the asset tree read once.

A batch holds the archive's writer lock from start to end, so nothing else changes the
machine models, shafts or alarm plans meanwhile.  :class:`ArchiveView` wraps the open
:class:`engine.archive.Archive` and answers every call with the archive's own method,
except:

* ``machine_model``, ``point_shaft`` and ``plan`` are read once per batch (each read
  otherwise opens ``plant.h5``); a change made through the view (``set_plans``,
  ``clear_plan``, ...) forgets them.

The pipeline's functions take the view wherever they take an archive.
"""

from __future__ import annotations

#: Archive methods that change what the view remembers.
_CHANGES = ("set_plan", "set_plans", "clear_plan", "set_machine_model", "update_point",
            "update_machine", "rebuild", "reload")


class ArchiveView:
    """An open writer :class:`~engine.archive.Archive` with the reads a batch repeats
    made once (see the module notes)."""

    def __init__(self, arc):
        self._arc = arc
        self._memo: dict = {}

    def __getattr__(self, name: str):
        attr = getattr(self._arc, name)
        if name in _CHANGES:
            def changing(*args, **kwargs):
                self._memo.clear()
                return attr(*args, **kwargs)
            return changing
        return attr

    @property
    def archive(self):
        """The archive itself."""
        return self._arc

    # -- the asset tree, read once --------------------------------------------------------
    def _once(self, key: tuple, read):
        if key not in self._memo:
            self._memo[key] = read()
        return self._memo[key]

    def machine_model(self, site: str, tag: str):
        return self._once(("model", site, tag), lambda: self._arc.machine_model(site, tag))

    def point_shaft(self, point: str) -> str:
        return self._once(("shaft", point), lambda: self._arc.point_shaft(point))

    def plan(self, point: str):
        return self._once(("plan", point), lambda: self._arc.plan(point))
