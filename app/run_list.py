"""The runs of the selected point (newest first): date taken, speed, overall velocity and
state; picking one shows it in the views."""

from __future__ import annotations

from datetime import UTC, datetime

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QHeaderView, QTreeWidget, QTreeWidgetItem, QVBoxLayout, QWidget

from engine.units import scale_factor

from .context import Palette
from .tree import dot_icon

RUN_ROLE = Qt.ItemDataRole.UserRole


def taken_text(taken_s: float) -> str:
    """A run's time taken as ``YYYY-MM-DD HH:MM`` UTC."""
    return datetime.fromtimestamp(float(taken_s), tz=UTC).strftime("%Y-%m-%d %H:%M")


class RunList(QWidget):
    """The run list under the asset tree.

    Signals
    -------
    run_chosen(str)
        The user picked a run (click or keyboard), or :meth:`step_run` moved to one.
    """

    run_chosen = Signal(str)

    def __init__(self, palette: Palette, parent: QWidget | None = None):
        super().__init__(parent)
        self.palette = palette
        self.units = "SI"
        self._rows: list = []
        self.table = QTreeWidget(self)
        self.table.setRootIsDecorated(False)
        self.table.setUniformRowHeights(True)
        self.table.setAlternatingRowColors(True)
        self.table.setColumnCount(4)
        self._headers()
        self.table.setToolTip("Runs of the selected point, newest first (Alt+Left / "
                              "Alt+Right: earlier / later run)")
        header = self.table.header()
        for c in range(4):
            header.setSectionResizeMode(c, QHeaderView.ResizeMode.ResizeToContents)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(2, 2, 2, 2)
        lay.addWidget(self.table)
        self.table.currentItemChanged.connect(self._current_changed)

    def _headers(self) -> None:
        overall = "Overall in/s" if self.units == "US" else "Overall mm/s"
        self.table.setHeaderLabels(["Taken (UTC)", "Speed rpm", overall, "State"])

    def set_runs(self, rows: list, *, units: str = "SI", current: str | None = None) -> None:
        """Show catalogue rows (``Archive.runs(point)``, oldest first as given) newest
        first, with ``current`` (a run id) selected without emitting ``run_chosen``."""
        self._rows = list(rows)
        self.units = units
        self._headers()
        factor = scale_factor("mm/s", "in/s") if units == "US" else 1.0
        self.table.blockSignals(True)
        try:
            self.table.clear()
            for row in reversed(self._rows):
                rpm = "" if row.rpm != row.rpm else f"{row.rpm:.0f}"
                v = row.velocity_rms_mm_s
                overall = "" if v != v else f"{v * factor:.3f}" if units == "US" else f"{v:.2f}"
                state = row.state or ""
                if row.quality == "error" and not state:
                    state = "bad data"
                item = QTreeWidgetItem([taken_text(row.taken_s), rpm, overall,
                                        self.palette.state_word(state)])
                item.setIcon(3, dot_icon(self.palette.state(state)))
                item.setData(0, RUN_ROLE, row.run_id)
                for c in (1, 2):
                    item.setTextAlignment(c, Qt.AlignmentFlag.AlignRight
                                          | Qt.AlignmentFlag.AlignVCenter)
                item.setToolTip(0, f"run {row.run_id}\ndata quality: {row.quality}")
                self.table.addTopLevelItem(item)
        finally:
            self.table.blockSignals(False)
        if current:
            self.select_run(current, emit=False)

    def run_ids(self) -> list[str]:
        """Run ids in the order shown (newest first)."""
        return [self.table.topLevelItem(i).data(0, RUN_ROLE)
                for i in range(self.table.topLevelItemCount())]

    def latest(self) -> str | None:
        return self._rows[-1].run_id if self._rows else None

    def current_run(self) -> str | None:
        item = self.table.currentItem()
        return item.data(0, RUN_ROLE) if item is not None else None

    def select_run(self, run_id: str, *, emit: bool = True) -> bool:
        for i in range(self.table.topLevelItemCount()):
            item = self.table.topLevelItem(i)
            if item.data(0, RUN_ROLE) == run_id:
                self.table.blockSignals(not emit)
                try:
                    self.table.setCurrentItem(item)
                    self.table.scrollToItem(item)
                finally:
                    self.table.blockSignals(False)
                return True
        return False

    def step_run(self, step: int) -> str | None:
        """A later (+1) or earlier (−1) run; the list shows the newest first."""
        ids = self.run_ids()
        if not ids:
            return None
        current = self.current_run()
        i = ids.index(current) if current in ids else 0
        j = min(max(i - step, 0), len(ids) - 1)
        if j != i or current not in ids:
            self.select_run(ids[j])
        return ids[j]

    def _current_changed(self, item, _previous) -> None:
        if item is not None:
            self.run_chosen.emit(item.data(0, RUN_ROLE))
