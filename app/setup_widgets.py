"""Small pieces the setup editors share: an editable table of rows with typed columns
and choice lists, reading numbers from table cells with messages that name the field,
and marking a cell that holds a problem."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from PySide6.QtCore import QModelIndex, Qt, Signal
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QComboBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QPushButton,
    QStyledItemDelegate,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from engine.errors import InputError

#: Background of a cell whose text is refused.
PROBLEM_COLOUR = QColor(213, 94, 0, 60)


def number_text(value, digits: int = 6) -> str:
    """A number as a short text ("" for None or NaN)."""
    if value is None:
        return ""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(v):
        return ""
    if v == int(v) and abs(v) < 1e12:
        return str(int(v))
    return f"{v:.{digits}g}"


def round_sig(value: float, digits: int = 3) -> float:
    """``value`` rounded to ``digits`` significant digits (levels typed by hand rarely
    carry more)."""
    v = float(value)
    if v == 0 or not math.isfinite(v):
        return v
    return round(v, digits - 1 - int(math.floor(math.log10(abs(v)))))


def parse_number(text: str, field: str, *, optional: bool = False, whole: bool = False
                 ) -> float | int | None:
    """A number typed in a cell.

    Parameters
    ----------
    text : str
    field : str
        What the cell is (``"shafts[1].ratio"``), named in the message.
    optional : bool, keyword-only
        An empty cell gives None instead of an error.
    whole : bool, keyword-only
        The number must be a whole number (returned as int).

    Raises
    ------
    InputError
        ``"<field> must be a number, got 'abc'"``.
    """
    t = str(text).strip().replace(",", ".") if text is not None else ""
    if not t:
        if optional:
            return None
        raise InputError(f"{field} is empty; give a number")
    try:
        v = float(t)
    except ValueError:
        raise InputError(f"{field} must be a {'whole ' if whole else ''}number, got {t!r}") \
            from None
    if whole:
        if not math.isfinite(v) or v != int(v):
            raise InputError(f"{field} must be a whole number, got {t!r}")
        return int(v)
    return v


class ChoiceDelegate(QStyledItemDelegate):
    """Edits a cell with a drop-down of choices (``choices()`` is asked each time, so
    that a list of shaft names follows the shafts table).  ``editable`` lets the user
    type a value that is not in the list."""

    def __init__(self, choices: Callable[[], Sequence[str]], parent=None, *,
                 editable: bool = False):
        super().__init__(parent)
        self._choices = choices
        self._editable = editable

    def createEditor(self, parent, option, index: QModelIndex):
        box = QComboBox(parent)
        box.setEditable(self._editable)
        box.addItems([str(c) for c in self._choices()])
        return box

    def setEditorData(self, editor: QComboBox, index: QModelIndex) -> None:
        text = str(index.data(Qt.ItemDataRole.EditRole) or "")
        i = editor.findText(text)
        if i >= 0:
            editor.setCurrentIndex(i)
        elif self._editable:
            editor.setEditText(text)

    def setModelData(self, editor: QComboBox, model, index: QModelIndex) -> None:
        model.setData(index, editor.currentText(), Qt.ItemDataRole.EditRole)


@dataclass(frozen=True)
class Column:
    """A column of an :class:`EditTable`: key, header, tooltip, and optionally a
    choice list (callable) and whether it can be edited."""

    key: str
    header: str
    tooltip: str = ""
    choices: Callable[[], Sequence[str]] | None = None
    editable_choice: bool = False
    read_only: bool = False


class EditTable(QWidget):
    """A titled table of rows with Add and Remove buttons.

    Signals
    -------
    edited(int, str)
        The user changed the cell of row ``int`` in column ``str`` (a key).
    rows_changed()
        A row was added or removed.
    """

    edited = Signal(int, str)
    rows_changed = Signal()

    def __init__(self, title: str, columns: Sequence[Column], parent: QWidget | None = None,
                 *, add_text: str = "Add", remove_text: str = "Remove",
                 defaults: Callable[[], dict] | None = None):
        super().__init__(parent)
        self.columns = list(columns)
        self.keys = [c.key for c in self.columns]
        self._defaults = defaults or (lambda: {})
        self._filling = False
        self.name = title
        self.title = QLabel(f"<b>{title}</b>", self)
        self.table = QTableWidget(0, len(self.columns), self)
        self.table.setHorizontalHeaderLabels([c.header for c in self.columns])
        self.table.verticalHeader().setVisible(False)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        head = self.table.horizontalHeader()
        head.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        head.setStretchLastSection(True)
        for i, c in enumerate(self.columns):
            item = self.table.horizontalHeaderItem(i)
            if item is not None and c.tooltip:
                item.setToolTip(c.tooltip)
            if c.choices is not None:
                self.table.setItemDelegateForColumn(
                    i, ChoiceDelegate(c.choices, self.table, editable=c.editable_choice))
        self.add_button = QPushButton(add_text, self)
        self.remove_button = QPushButton(remove_text, self)
        self.add_button.clicked.connect(lambda: self.add_row(self._defaults()))
        self.remove_button.clicked.connect(self.remove_selected)
        self.table.itemChanged.connect(self._item_changed)
        top = QHBoxLayout()
        top.setContentsMargins(0, 0, 0, 0)
        top.addWidget(self.title, 1)
        top.addWidget(self.add_button)
        top.addWidget(self.remove_button)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addLayout(top)
        lay.addWidget(self.table, 1)

    # -- rows ---------------------------------------------------------------------------
    def set_rows(self, rows: Sequence[dict]) -> None:
        """Replace every row (``rows`` map column keys to values; missing keys: empty)."""
        self._filling = True
        try:
            self.table.setRowCount(0)
            for r in rows:
                self._append(r)
        finally:
            self._filling = False

    def _append(self, values: dict) -> int:
        i = self.table.rowCount()
        self.table.insertRow(i)
        for j, c in enumerate(self.columns):
            item = QTableWidgetItem(str(values.get(c.key, "") if values.get(c.key) is not None
                                        else ""))
            if c.read_only:
                item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
            if c.tooltip:
                item.setToolTip(c.tooltip)
            self.table.setItem(i, j, item)
        return i

    def add_row(self, values: dict | None = None) -> int:
        self._filling = True
        try:
            i = self._append(values or {})
        finally:
            self._filling = False
        self.table.selectRow(i)
        self.rows_changed.emit()
        return i

    def remove_selected(self) -> list[int]:
        rows = sorted({ix.row() for ix in self.table.selectedIndexes()}, reverse=True)
        for i in rows:
            self.table.removeRow(i)
        if rows:
            self.rows_changed.emit()
        return rows

    def row_count(self) -> int:
        return self.table.rowCount()

    def text(self, row: int, key: str) -> str:
        item = self.table.item(row, self.keys.index(key))
        return item.text().strip() if item is not None else ""

    def set_text(self, row: int, key: str, text: str) -> None:
        """Change a cell without emitting ``edited``."""
        self._filling = True
        try:
            item = self.table.item(row, self.keys.index(key))
            if item is None:
                item = QTableWidgetItem()
                self.table.setItem(row, self.keys.index(key), item)
            item.setText(str(text))
        finally:
            self._filling = False

    def rows(self) -> list[dict[str, str]]:
        """Every row as ``{key: cell text}``."""
        return [{k: self.text(i, k) for k in self.keys} for i in range(self.row_count())]

    # -- problems -----------------------------------------------------------------------
    def mark(self, row: int, key: str, problem: str = "") -> None:
        """Shade a cell that holds a problem (``problem`` its message) or clear it."""
        item = self.table.item(row, self.keys.index(key))
        if item is None:
            return
        self._filling = True
        try:
            item.setBackground(QBrush(PROBLEM_COLOUR) if problem else QBrush())
            col = self.columns[self.keys.index(key)]
            item.setToolTip(problem or col.tooltip)
        finally:
            self._filling = False

    def clear_marks(self) -> None:
        for i in range(self.row_count()):
            for k in self.keys:
                self.mark(i, k, "")

    def focus_cell(self, row: int, key: str) -> None:
        if 0 <= row < self.row_count() and key in self.keys:
            self.table.setCurrentCell(row, self.keys.index(key))

    def _item_changed(self, item: QTableWidgetItem) -> None:
        if self._filling:
            return
        self.edited.emit(item.row(), self.keys[item.column()])
