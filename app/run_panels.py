"""The run view's side panels: the table of labelled peaks and the findings with their
evidence."""

from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHeaderView,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from engine.kinematics import LabelledPeak

from .context import Palette
from .plots import XAxis
from .tree import dot_icon

#: Colour of each finding severity, as a state of the palette.
SEVERITY_STATE = {"serious": "danger", "warning": "alert", "watch": "bad data", "info": "ok"}
HZ_ROLE = Qt.ItemDataRole.UserRole


class PeakTable(QTableWidget):
    """The largest peaks, each with the source it matches best.

    Signals
    -------
    peak_chosen(float)
        Frequency of the peak the user picked, Hz.
    """

    peak_chosen = Signal(float)

    def __init__(self, parent: QWidget | None = None):
        super().__init__(0, 4, parent)
        self.setHorizontalHeaderLabels(["Frequency", "Order", "Amplitude", "Source"])
        self.verticalHeader().setVisible(False)
        self.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.setAlternatingRowColors(True)
        self.verticalHeader().setDefaultSectionSize(self.fontMetrics().height() + 6)
        h = self.horizontalHeader()
        for c in range(3):
            h.setSectionResizeMode(c, QHeaderView.ResizeMode.ResizeToContents)
        h.setStretchLastSection(True)
        self.setToolTip("Peaks of the spectrum, largest first, with the machine source "
                        "each matches (within 1 % or one line); click one to put the "
                        "cursor on it")
        self.itemSelectionChanged.connect(self._chosen)

    def set_peaks(self, peaks: list[LabelledPeak], axis: XAxis, unit_label: str) -> None:
        self.blockSignals(True)
        try:
            self.setRowCount(0)
            self.horizontalHeaderItem(2).setToolTip(f"Interpolated amplitude, {unit_label}")
            unit = {"Hz": "Hz", "CPM": "CPM", "orders": "×"}[axis.usable]
            for lp in peaks:
                p = lp.peak
                r = self.rowCount()
                self.insertRow(r)
                x = axis.to_x(p.frequency_hz)
                f_text = f"{x:.0f} {unit}" if axis.usable == "CPM" else \
                    f"{x:.3f} {unit}" if axis.usable == "orders" else f"{x:.2f} {unit}"
                order = "" if p.order is None else f"{p.order:.2f}×"
                best = lp.best
                src = "" if best is None else best.name
                if best is not None and len(lp.matches) > 1:
                    src += f" (+{len(lp.matches) - 1})"
                cells = [f_text, order, f"{p.amplitude:.4g}", src]
                for c, text in enumerate(cells):
                    item = QTableWidgetItem(text)
                    item.setData(HZ_ROLE, p.frequency_hz)
                    if c < 3:
                        item.setTextAlignment(Qt.AlignmentFlag.AlignRight
                                              | Qt.AlignmentFlag.AlignVCenter)
                    if c == 3 and lp.matches:
                        item.setToolTip("\n".join(f"{s.name}: {s.frequency_hz:.2f} Hz "
                                                  f"({e:+.2f} Hz)" for s, e in lp.matches))
                    self.setItem(r, c, item)
        finally:
            self.blockSignals(False)

    def sources(self) -> list[str]:
        return [self.item(r, 3).text() for r in range(self.rowCount())]

    def _chosen(self) -> None:
        items = self.selectedItems()
        if items:
            self.peak_chosen.emit(float(items[0].data(HZ_ROLE)))


def evidence_marks(finding: dict) -> tuple[list[tuple[float, str]], list[tuple[float, str]]]:
    """A finding's evidence frequencies split by plot: (spectrum, envelope) lists of
    ``(frequency_hz, label)``; evidence in g of a bearing finding is envelope evidence."""
    spectrum, envelope = [], []
    for ev in finding.get("evidence", []):
        hz = ev.get("frequency_hz")
        if hz is None or not hz == hz:
            continue
        label = ev.get("source_name") or ev.get("description", "")
        unit = str(ev.get("unit", ""))
        on_envelope = "envelope" in ev.get("description", "") or \
            (unit.split(" ")[0] in ("g", "m/s2") and finding.get("kind") == "bearing")
        (envelope if on_envelope else spectrum).append((float(hz), label))
    return spectrum, envelope


def _evidence_text(e: dict) -> str:
    """One line of evidence: what, where (Hz, when it has a frequency) and how much."""
    text = str(e.get("description", ""))
    extra = []
    hz, amp = e.get("frequency_hz"), e.get("amplitude")
    if hz is not None and hz == hz:
        extra.append(f"{hz:.2f} Hz")
    if amp is not None and amp == amp:
        extra.append(f"{amp:.3g} {e.get('unit', '')}".strip())
    return f"{text}: {', '.join(extra)}" if extra else text


class FindingsPanel(QWidget):
    """The run's findings, most severe first; picking one shows its evidence.

    Signals
    -------
    finding_chosen(object)
        The finding (dict) the user picked, or None.
    """

    finding_chosen = Signal(object)

    def __init__(self, palette: Palette, parent: QWidget | None = None):
        super().__init__(parent)
        self.palette = palette
        self._findings: list[dict] = []
        self.list = QListWidget(self)
        self.list.setToolTip("Findings of this run; pick one to see its evidence marked on "
                             "the spectra")
        self.detail = QLabel(self)
        self.detail.setWordWrap(True)
        self.detail.setTextFormat(Qt.TextFormat.RichText)
        self.detail.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.detail.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        split = QSplitter(Qt.Orientation.Vertical, self)
        split.addWidget(self.list)
        split.addWidget(self.detail)
        split.setSizes([90, 400])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(split)
        self.list.currentRowChanged.connect(self._chosen)

    def set_findings(self, findings: list[dict], *, note: str = "") -> None:
        self._findings = list(findings)
        self.list.blockSignals(True)
        try:
            self.list.clear()
            for f in self._findings:
                sev = f.get("severity", "")
                item = QListWidgetItem(f"{sev}: {f.get('title', f.get('kind', ''))}")
                item.setIcon(dot_icon(self.palette.state(SEVERITY_STATE.get(sev, ""))))
                item.setToolTip(f.get("recommendation", ""))
                self.list.addItem(item)
        finally:
            self.list.blockSignals(False)
        if not self._findings:
            self.detail.setText(note or "No findings for this run.")
        else:
            self.detail.setText("Pick a finding to see its evidence.")

    def titles(self) -> list[str]:
        return [f.get("title", "") for f in self._findings]

    def select(self, row: int) -> None:
        self.list.setCurrentRow(row)

    def _chosen(self, row: int) -> None:
        if not 0 <= row < len(self._findings):
            self.finding_chosen.emit(None)
            return
        f = self._findings[row]
        ev = "".join(f"<li>{_evidence_text(e)}</li>" for e in f.get("evidence", []))
        stage = f" (stage {f['stage']})" if f.get("stage") else ""
        self.detail.setText(f"<b>{f.get('title', '')}</b>{stage}<br>"
                            f"Severity: {f.get('severity', '')}<br>"
                            f"<i>{f.get('recommendation', '')}</i><ul>{ev}</ul>")
        self.finding_chosen.emit(f)
