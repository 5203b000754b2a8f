"""The asset tree: site → machine → point, each point with its current state and ISO 20816
zone (by word and by colour), machines with their worst point's state, a filter box and a
"worst first" order.
"""

from __future__ import annotations

from collections.abc import Iterable

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QColor, QIcon, QPainter, QPixmap
from PySide6.QtWidgets import (
    QCheckBox,
    QHBoxLayout,
    QHeaderView,
    QLineEdit,
    QTreeWidget,
    QTreeWidgetItem,
    QVBoxLayout,
    QWidget,
)

from engine.units import scale_factor

from .context import Palette

#: How bad a state is, for "worst first" and for a machine's state (higher is worse).
SEVERITY = {"danger": 5, "alert": 4, "bad data": 3, "ok": 2, "no data": 1, "": 0}
PATH_ROLE = Qt.ItemDataRole.UserRole
KIND_ROLE = Qt.ItemDataRole.UserRole + 1
COLUMNS = ("Asset", "State", "Zone", "Overall")


def severity(state: str) -> int:
    return SEVERITY.get(state or "", 0)


def worst_state(states: Iterable[str]) -> str:
    """The worst of some states (``""``, not evaluated, when there are none)."""
    return max(states, key=severity, default="")


def point_states_of(arc) -> dict[str, dict]:
    """Point path → ``{"state", "zone", "overall_mm_s", "run_id", "taken_s", …}``
    (``Archive.point_states``, copied so that the tree may keep it)."""
    return {p: dict(v) for p, v in arc.point_states().items()}


def dot_icon(colour: QColor, size: int = 12) -> QIcon:
    """A filled circle in ``colour`` (the state's colour beside its word)."""
    pm = QPixmap(size, size)
    pm.fill(Qt.GlobalColor.transparent)
    p = QPainter(pm)
    p.setRenderHint(QPainter.RenderHint.Antialiasing)
    p.setPen(QColor(colour).darker(140))
    p.setBrush(colour)
    p.drawEllipse(1, 1, size - 2, size - 2)
    p.end()
    return QIcon(pm)


class AssetTree(QWidget):
    """Filter box, "worst first" toggle and the tree.

    Signals
    -------
    point_chosen(str)
        A point became the current item (by click, keyboard or :meth:`select_point`).
    """

    point_chosen = Signal(str)

    def __init__(self, palette: Palette, parent: QWidget | None = None):
        super().__init__(parent)
        self.palette = palette
        self.units = "SI"
        self._plant: list[dict] = []
        self._states: dict[str, dict] = {}
        self.filter = QLineEdit(self)
        self.filter.setPlaceholderText("Filter: tag, name, point or state")
        self.filter.setClearButtonEnabled(True)
        self.filter.setToolTip("Show only machines and points whose tag, name or state "
                               "contains this text (Ctrl+F)")
        self.worst_first = QCheckBox("Worst first", self)
        self.worst_first.setToolTip("Order machines and points by state, danger first")
        self.tree = QTreeWidget(self)
        self.tree.setColumnCount(len(COLUMNS))
        self.tree.setHeaderLabels(list(COLUMNS))
        self.tree.setUniformRowHeights(True)
        self.tree.setAlternatingRowColors(True)
        self.tree.setToolTip("Sites, machines and measurement points with their current "
                             "state and ISO 20816 zone")
        header = self.tree.header()
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        for c in range(1, len(COLUMNS)):
            header.setSectionResizeMode(c, QHeaderView.ResizeMode.ResizeToContents)
        header.setStretchLastSection(False)
        top = QHBoxLayout()
        top.setContentsMargins(0, 0, 0, 0)
        top.addWidget(self.filter, 1)
        top.addWidget(self.worst_first)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(2, 2, 2, 2)
        lay.addLayout(top)
        lay.addWidget(self.tree, 1)
        self.filter.textChanged.connect(self._apply_filter)
        self.worst_first.toggled.connect(lambda _: self._rebuild())
        self.tree.currentItemChanged.connect(self._current_changed)

    # -- content ------------------------------------------------------------------------
    def load(self, plant: list[dict], states: dict[str, dict], *, units: str = "SI") -> None:
        """Show ``plant`` (``Archive.tree()``) with ``states`` (:func:`point_states_of`);
        the current point stays current when it still exists."""
        self._plant = plant
        self._states = states
        self.units = units
        self._rebuild()

    def set_palette(self, palette: Palette) -> None:
        self.palette = palette
        self._rebuild()

    def set_units(self, units: str) -> None:
        self.units = units
        self._rebuild()

    def state_of(self, path: str) -> dict:
        return self._states.get(path, {})

    def machine_state(self, site: str, tag: str) -> str:
        """The worst state of the machine's points."""
        for s in self._plant:
            if s["name"] != site:
                continue
            for m in s["machines"]:
                if m["tag"] == tag:
                    return worst_state(self.state_of(p["path"]).get("state", "")
                                       for p in m["points"])
        return ""

    def _overall_text(self, mm_s) -> str:
        if mm_s is None or mm_s != mm_s:
            return ""
        if self.units == "US":
            return f"{mm_s * scale_factor('mm/s', 'in/s'):.3f} in/s"
        return f"{mm_s:.2f} mm/s"

    def _set_state(self, item: QTreeWidgetItem, state: str, zone: str) -> None:
        item.setText(1, self.palette.state_word(state))
        item.setIcon(1, dot_icon(self.palette.state(state)))
        item.setText(2, zone or "")
        if zone:
            item.setIcon(2, dot_icon(self.palette.zone(zone)))

    def _rebuild(self) -> None:
        current = self.current_point()
        self.tree.blockSignals(True)
        try:
            self.tree.clear()
            worst = self.worst_first.isChecked()
            for site in self._plant:
                s_item = QTreeWidgetItem(self.tree, [site["name"]])
                s_item.setData(0, KIND_ROLE, "site")
                s_item.setToolTip(0, site.get("description") or site["name"])
                machines = list(site["machines"])
                m_states = {m["tag"]: worst_state(self.state_of(p["path"]).get("state", "")
                                                  for p in m["points"]) for m in machines}
                if worst:
                    machines.sort(key=lambda m: (-severity(m_states[m["tag"]]), m["tag"]))
                s_states = []
                for m in machines:
                    name = m.get("name") or ""
                    m_item = QTreeWidgetItem(s_item, [f"{m['tag']}  {name}".strip()])
                    m_item.setData(0, KIND_ROLE, "machine")
                    m_item.setData(0, PATH_ROLE, f"{site['name']}/{m['tag']}")
                    m_item.setToolTip(0, m.get("description") or name)
                    state = m_states[m["tag"]]
                    s_states.append(state)
                    self._set_state(m_item, state, "")
                    m_item.setToolTip(1, f"worst state of the points of {m['tag']}: "
                                         f"{self.palette.state_word(state)}")
                    points = list(m["points"])
                    if worst:
                        points.sort(key=lambda p: (-severity(self.state_of(p["path"])
                                                             .get("state", "")), p["name"]))
                    for p in points:
                        st = self.state_of(p["path"])
                        p_item = QTreeWidgetItem(m_item, [p["name"]])
                        p_item.setData(0, KIND_ROLE, "point")
                        p_item.setData(0, PATH_ROLE, p["path"])
                        self._set_state(p_item, st.get("state", ""), st.get("zone", ""))
                        p_item.setText(3, self._overall_text(st.get("overall_mm_s")))
                        tip = [p["path"], f"state: {self.palette.state_word(st.get('state', ''))}"]
                        if st.get("zone"):
                            tip.append(f"ISO 20816 zone {st['zone']}")
                        if st.get("worst_band"):
                            tip.append(f"worst band: {st['worst_band']}")
                        tip.append(f"runs: {p.get('runs', 0)}")
                        p_item.setToolTip(0, "\n".join(tip))
                        p_item.setToolTip(3, "Overall velocity RMS of the latest run "
                                             "(ISO 20816 broadband)")
                    m_item.setExpanded(True)
                self._set_state(s_item, worst_state(s_states), "")
                s_item.setExpanded(True)
            self._apply_filter(self.filter.text())
        finally:
            self.tree.blockSignals(False)
        if current:
            self.select_point(current, emit=False)

    # -- filter -------------------------------------------------------------------------
    def _apply_filter(self, text: str) -> None:
        needle = text.strip().lower()
        for i in range(self.tree.topLevelItemCount()):
            site = self.tree.topLevelItem(i)
            any_machine = False
            for j in range(site.childCount()):
                m = site.child(j)
                m_hit = not needle or needle in m.text(0).lower()
                any_point = False
                for k in range(m.childCount()):
                    p = m.child(k)
                    p_hit = m_hit or needle in p.text(0).lower() or needle in p.text(1).lower() \
                        or needle == p.text(2).lower()
                    p.setHidden(not p_hit)
                    any_point |= p_hit
                m.setHidden(not (m_hit or any_point))
                any_machine |= m_hit or any_point
            site.setHidden(not (any_machine or needle in site.text(0).lower()))

    # -- selection ----------------------------------------------------------------------
    def _point_items(self, visible_only: bool = True) -> list[QTreeWidgetItem]:
        out = []
        for i in range(self.tree.topLevelItemCount()):
            site = self.tree.topLevelItem(i)
            for j in range(site.childCount()):
                m = site.child(j)
                for k in range(m.childCount()):
                    p = m.child(k)
                    hidden = p.isHidden() or m.isHidden() or site.isHidden()
                    if not (visible_only and hidden):
                        out.append(p)
        return out

    def points(self, visible_only: bool = True) -> list[str]:
        """Point paths in the order shown (only the ones the filter lets through)."""
        return [it.data(0, PATH_ROLE) for it in self._point_items(visible_only)]

    def current_point(self) -> str | None:
        item = self.tree.currentItem()
        if item is not None and item.data(0, KIND_ROLE) == "point":
            return item.data(0, PATH_ROLE)
        return None

    def select_point(self, path: str, *, emit: bool = True) -> bool:
        """Make ``path`` the current point; False when the tree does not show it."""
        for item in self._point_items(visible_only=False):
            if item.data(0, PATH_ROLE) == path:
                if not emit:
                    self.tree.blockSignals(True)
                try:
                    self.tree.setCurrentItem(item)
                    self.tree.scrollToItem(item)
                finally:
                    self.tree.blockSignals(False)
                return True
        return False

    def step_point(self, step: int) -> str | None:
        """Move to the next (+1) or previous (−1) visible point; returns the new point."""
        points = self.points()
        if not points:
            return None
        current = self.current_point()
        if current in points:
            i = (points.index(current) + step) % len(points)
        else:
            i = 0 if step > 0 else len(points) - 1
        self.select_point(points[i])
        return points[i]

    def _current_changed(self, item: QTreeWidgetItem | None, _previous) -> None:
        if item is not None and item.data(0, KIND_ROLE) == "point":
            self.point_chosen.emit(item.data(0, PATH_ROLE))
