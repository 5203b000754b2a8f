"""The machine-model editor: shafts and their speed ratios, gear pairs, belt drives,
blade rows, rolling bearings (typed, or picked from the archive's bearing list) with
their defect orders, and the motor's supply.

The tables are read into the dict form of :meth:`engine.kinematics.MachineModel.as_dict`
and checked by :meth:`MachineModel.from_dict`, so every message names the engine's own
field (``gears[0].driver_teeth``); the editor adds the table, row and column.
"""

from __future__ import annotations

import re
from dataclasses import asdict

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QFormLayout,
    QGridLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QVBoxLayout,
    QWidget,
)

from engine.bearings import LENGTH_UNITS, BearingGeometry, defect_orders
from engine.errors import EngineError, InputError
from engine.kinematics import MachineModel

from . import dialogs
from .context import AppContext
from .setup_widgets import Column, EditTable, number_text, parse_number

#: Defect orders shown per bearing: (key of DefectOrders, header).
ORDER_COLUMNS = (("ftf", "FTF ×"), ("bsf", "BSF ×"), ("bsf2", "2×BSF ×"), ("bpfo", "BPFO ×"),
                 ("bpfi", "BPFI ×"))
GEOMETRY_KEYS = ("elements", "element_diameter", "pitch_diameter", "contact_angle_deg", "unit")
_PART_RE = re.compile(r"\b(shafts|gears|belts|blades|bearings)\[(\d+)\]")


class ModelEditor(QWidget):
    """Edit the kinematic model of the selected point's machine.

    Parameters
    ----------
    ctx : AppContext
    parent : QWidget, optional

    Signals
    -------
    saved(str, str)
        The model of machine (site, tag) was stored.
    message(str)
        A line for the status bar.
    """

    saved = Signal(str, str)
    message = Signal(str)

    def __init__(self, ctx: AppContext, parent: QWidget | None = None):
        super().__init__(parent)
        self.ctx = ctx
        self.site: str | None = None
        self.tag: str | None = None
        self.last_error = None
        self.dirty = False
        self._library: list[BearingGeometry] = []
        shaft_names = self.shaft_names
        self.shafts = EditTable("Shafts", [
            Column("name", "Shaft", "Name of the shaft (motor, pump, input …)"),
            Column("ratio", "Ratio", "Speed / the reference shaft's speed (the motor is 1); "
                   "leave empty when a gear pair or belt gives it"),
            Column("resolved", "Turns at ×", "Ratio given or derived through gears and belts",
                   read_only=True)], self, add_text="Add shaft",
            defaults=lambda: {"name": f"shaft {self.shafts.row_count() + 1}", "ratio": ""})
        self.gears = EditTable("Gear pairs", [
            Column("driver_shaft", "Driver", "Shaft of the driving gear", shaft_names),
            Column("driven_shaft", "Driven", "Shaft of the driven gear", shaft_names),
            Column("driver_teeth", "Driver teeth"), Column("driven_teeth", "Driven teeth")],
            self, add_text="Add gear pair", defaults=self._link_defaults)
        self.belts = EditTable("Belt drives", [
            Column("driver_shaft", "Driver", "Shaft of the driving pulley", shaft_names),
            Column("driven_shaft", "Driven", "Shaft of the driven pulley", shaft_names),
            Column("driver_diameter", "Driver ⌀", "Pitch diameter of the driving pulley (mm)"),
            Column("driven_diameter", "Driven ⌀", "Pitch diameter of the driven pulley (mm)"),
            Column("belt_length", "Belt length", "Belt pitch length (mm); empty when not "
                   "known (no belt-pass frequency)")], self, add_text="Add belt",
            defaults=self._link_defaults)
        self.blades = EditTable("Blade and vane rows", [
            Column("shaft", "Shaft", "Shaft the impeller or fan is on", shaft_names),
            Column("count", "Blades", "Number of blades or vanes")], self, add_text="Add row",
            defaults=lambda: {"shaft": (self.shaft_names() or [""])[-1], "count": ""})
        self.bearings = EditTable("Rolling bearings", [
            Column("shaft", "Shaft", "Shaft the bearing carries", shaft_names),
            Column("label", "Location", "Where it sits (pump DE …); points at this location "
                   "use its defect frequencies"),
            Column("geometry", "Bearing", "Name of the geometry (as in the bearing list)"),
            Column("elements", "Elements", "Number of balls or rollers"),
            Column("element_diameter", "d", "Rolling-element diameter"),
            Column("pitch_diameter", "D", "Pitch-circle diameter"),
            Column("contact_angle_deg", "α (°)", "Contact angle, degrees"),
            Column("unit", "Unit", "Length unit of d and D", lambda: LENGTH_UNITS),
            *[Column(k, h, f"{h.rstrip(' ×')} in orders of shaft speed (from the geometry)",
                     read_only=True) for k, h in ORDER_COLUMNS]],
            self, add_text="Add bearing",
            defaults=lambda: {"shaft": (self.shaft_names() or [""])[0], "label": "",
                              "contact_angle_deg": "0", "unit": "mm"})
        self.tables = {"shafts": self.shafts, "gears": self.gears, "belts": self.belts,
                       "blades": self.blades, "bearings": self.bearings}

        self.library = QComboBox(self)
        self.library.setToolTip("The archive's bearing list")
        self.use_button = QPushButton("Use for selected bearing", self)
        self.use_button.setToolTip("Copy the chosen geometry into the selected bearing row")
        self.add_library_button = QPushButton("Add selected to bearing list", self)
        self.add_library_button.setToolTip("Keep the selected row's geometry in the archive's "
                                           "bearing list, for other machines")
        self.line_hz = QLineEdit(self)
        self.line_hz.setPlaceholderText("none")
        self.line_hz.setToolTip("Supply frequency of the motor, Hz (50 or 60 for mains; "
                                "empty for an inverter drive)")
        self.motor_shaft = QComboBox(self)
        self.motor_shaft.setToolTip("The motor's shaft, for line-frequency sources")
        self.poles = QLineEdit(self)
        self.poles.setPlaceholderText("none")
        self.poles.setToolTip("Motor poles (even), for the pole-pass frequency")
        self.iso_group = QComboBox(self)
        for text, value in (("not set", 0), ("group 1 (above 300 kW)", 1),
                            ("group 2 (15–300 kW)", 2)):
            self.iso_group.addItem(text, value)
        self.iso_group.setToolTip("ISO 20816-3 machine group, for the default alarm levels")
        self.foundation = QComboBox(self)
        for text in ("", "rigid", "flexible"):
            self.foundation.addItem(text or "not set", text)
        self.foundation.setToolTip("Support in the direction measured (ISO 20816-3)")
        self.save_button = QPushButton("Save model", self)
        self.save_button.setToolTip("Check the model and store it in the archive")
        self.revert_button = QPushButton("Revert", self)
        self.revert_button.setToolTip("Show the stored model again")
        self.status = QLabel("", self)
        self.status.setWordWrap(True)
        self.status.setTextFormat(Qt.TextFormat.RichText)
        self._layout()

        for t in self.tables.values():
            t.edited.connect(self._edited)
            t.rows_changed.connect(self._refresh_derived)
            t.rows_changed.connect(self._mark_dirty)
        self.shafts.rows_changed.connect(self._refresh_motor_choices)
        for edit in (self.line_hz, self.poles):
            edit.textEdited.connect(self._mark_dirty)
        for box in (self.motor_shaft, self.iso_group, self.foundation):
            box.activated.connect(self._mark_dirty)
        self.use_button.clicked.connect(lambda: self.use_library_bearing(
            self.library.currentText()))
        self.add_library_button.clicked.connect(self.add_to_bearing_list)
        self.save_button.clicked.connect(self.save)
        self.revert_button.clicked.connect(lambda: self.load_machine(self.site, self.tag))

    def _layout(self) -> None:
        motor = QWidget(self)
        box = QVBoxLayout(motor)
        box.setContentsMargins(0, 0, 0, 0)
        box.addWidget(QLabel("<b>Motor and machine</b>", self))
        form = QFormLayout()
        box.addLayout(form)
        box.addStretch(1)
        form.addRow("Line frequency (Hz)", self.line_hz)
        form.addRow("Motor shaft", self.motor_shaft)
        form.addRow("Poles", self.poles)
        form.addRow("ISO 20816-3 group", self.iso_group)
        form.addRow("Foundation", self.foundation)
        grid = QGridLayout()
        grid.addWidget(self.shafts, 0, 0)
        grid.addWidget(self.gears, 0, 1)
        grid.addWidget(self.belts, 0, 2)
        grid.addWidget(self.blades, 1, 0)
        grid.addWidget(motor, 1, 1, 1, 2)
        grid.addWidget(self.bearings, 2, 0, 1, 3)
        grid.setRowStretch(0, 2)
        grid.setRowStretch(1, 2)
        grid.setRowStretch(2, 3)
        lib = QHBoxLayout()
        lib.addWidget(QLabel("Bearing list:", self))
        lib.addWidget(self.library, 1)
        lib.addWidget(self.use_button)
        lib.addWidget(self.add_library_button)
        buttons = QHBoxLayout()
        buttons.addWidget(self.status, 1)
        buttons.addWidget(self.revert_button)
        buttons.addWidget(self.save_button)
        lay = QVBoxLayout(self)
        lay.addLayout(grid, 1)
        lay.addLayout(lib)
        lay.addLayout(buttons)

    # -- choices ------------------------------------------------------------------------
    def shaft_names(self) -> list[str]:
        return [r["name"] for r in self.shafts.rows() if r["name"]]

    def _link_defaults(self) -> dict:
        names = self.shaft_names() or [""]
        return {"driver_shaft": names[0], "driven_shaft": names[-1]}

    def _refresh_motor_choices(self) -> None:
        current = self.motor_shaft.currentText()
        self.motor_shaft.blockSignals(True)
        self.motor_shaft.clear()
        self.motor_shaft.addItem("")
        self.motor_shaft.addItems(self.shaft_names())
        i = self.motor_shaft.findText(current)
        self.motor_shaft.setCurrentIndex(max(i, 0))
        self.motor_shaft.blockSignals(False)

    # -- loading ------------------------------------------------------------------------
    def load(self, point_path: str | None) -> None:
        """Show the model of the machine of ``point_path`` (nothing for None)."""
        if not point_path:
            self.load_machine(None, None)
            return
        info = self.ctx.archive().point(point_path)
        self.load_machine(info.site, info.machine)

    def load_machine(self, site: str | None, tag: str | None) -> None:
        self.site, self.tag = site, tag
        self.setEnabled(site is not None)
        arc = self.ctx.archive()
        model, ratios, props = None, {}, {}
        if site is not None:
            model = arc.machine_model(site, tag)
            m = arc.plant.machine(site, tag)
            ratios, props = dict(m.ratios), dict(m.props)
        self._library = arc.bearing_library()
        self.library.clear()
        self.library.addItems([b.label for b in self._library])
        if model is not None:
            self._fill(model)
            note = ""
        else:
            self._fill(MachineModel.from_dict({"shafts": [
                {"name": n, "ratio": r} for n, r in ratios.items()] or [
                {"name": "motor", "ratio": 1.0}]}))
            note = " — no model stored yet: shafts from the machine's speed ratios"
        group = int(props.get("iso_group") or 0)
        self.iso_group.setCurrentIndex(max(self.iso_group.findData(group), 0))
        self.foundation.setCurrentIndex(max(self.foundation.findData(
            str(props.get("foundation") or "")), 0))
        self._refresh_derived()
        self.dirty = False
        self.status.setText(f"<b>{site}/{tag}</b>{note}" if site else
                            "Pick a point in the asset tree.")

    def _fill(self, model: MachineModel) -> None:
        d = model.as_dict()
        ratios = model.ratios
        self.shafts.set_rows([{"name": s["name"], "ratio": number_text(s["ratio"]),
                               "resolved": f"{ratios[s['name']]:.5g}"} for s in d["shafts"]])
        self.gears.set_rows([{k: number_text(v) if not isinstance(v, str) else v
                              for k, v in g.items()} for g in d["gears"]])
        self.belts.set_rows([{k: number_text(v) if not isinstance(v, str) else v
                              for k, v in b.items()} for b in d["belts"]])
        self.blades.set_rows([{"shaft": b["shaft"], "count": str(b["count"])}
                              for b in d["blades"]])
        self.bearings.set_rows([self._bearing_row(b.shaft, b.label, b.geometry)
                                for b in model.bearings])
        self._refresh_motor_choices()
        self.motor_shaft.setCurrentIndex(max(self.motor_shaft.findText(
            model.motor_shaft or ""), 0))
        self.line_hz.setText(number_text(model.line_frequency_hz))
        self.poles.setText(number_text(model.poles))

    @staticmethod
    def _bearing_row(shaft: str, label: str, g: BearingGeometry) -> dict:
        return {"shaft": shaft, "label": label, "geometry": g.label,
                "elements": str(g.elements), "element_diameter": number_text(g.element_diameter),
                "pitch_diameter": number_text(g.pitch_diameter),
                "contact_angle_deg": number_text(g.contact_angle_deg), "unit": g.unit}

    # -- reading the tables -------------------------------------------------------------
    def _geometry(self, i: int, row: dict) -> BearingGeometry:
        path = f"machine model: bearings[{i}].geometry"
        return BearingGeometry(
            label=row["geometry"] or row["label"] or f"bearing {i + 1}",
            elements=parse_number(row["elements"], f"{path}.elements", whole=True),
            element_diameter=parse_number(row["element_diameter"], f"{path}.element_diameter"),
            pitch_diameter=parse_number(row["pitch_diameter"], f"{path}.pitch_diameter"),
            contact_angle_deg=parse_number(row["contact_angle_deg"] or "0",
                                           f"{path}.contact_angle_deg"),
            unit=row["unit"] or "mm")

    def model_data(self) -> dict:
        """The tables as the dict of :meth:`MachineModel.as_dict` (numbers parsed).

        Raises InputError naming the field (``machine model: gears[0].driver_teeth``).
        """
        def num(text, path, **kw):
            return parse_number(text, f"machine model: {path}", **kw)

        data: dict = {"shafts": [], "gears": [], "belts": [], "blades": [], "bearings": []}
        for i, r in enumerate(self.shafts.rows()):
            data["shafts"].append({"name": r["name"],
                                   "ratio": num(r["ratio"], f"shafts[{i}].ratio", optional=True)})
        for i, r in enumerate(self.gears.rows()):
            data["gears"].append({"driver_shaft": r["driver_shaft"],
                                  "driven_shaft": r["driven_shaft"],
                                  "driver_teeth": num(r["driver_teeth"],
                                                      f"gears[{i}].driver_teeth", whole=True),
                                  "driven_teeth": num(r["driven_teeth"],
                                                      f"gears[{i}].driven_teeth", whole=True)})
        for i, r in enumerate(self.belts.rows()):
            data["belts"].append({
                "driver_shaft": r["driver_shaft"], "driven_shaft": r["driven_shaft"],
                "driver_diameter": num(r["driver_diameter"], f"belts[{i}].driver_diameter"),
                "driven_diameter": num(r["driven_diameter"], f"belts[{i}].driven_diameter"),
                "belt_length": num(r["belt_length"], f"belts[{i}].belt_length", optional=True)})
        for i, r in enumerate(self.blades.rows()):
            data["blades"].append({"shaft": r["shaft"],
                                   "count": num(r["count"], f"blades[{i}].count", whole=True)})
        for i, r in enumerate(self.bearings.rows()):
            try:
                geometry = asdict(self._geometry(i, r))
            except InputError as exc:
                text = str(exc)
                if not text.startswith("machine model"):
                    text = f"machine model: bearings[{i}].geometry: {text}"
                raise InputError(text) from None
            data["bearings"].append({"shaft": r["shaft"], "label": r["label"],
                                     "geometry": geometry})
        data["line_frequency_hz"] = num(self.line_hz.text(), "line_frequency_hz", optional=True)
        data["motor_shaft"] = self.motor_shaft.currentText() or None
        data["poles"] = num(self.poles.text(), "poles", optional=True, whole=True)
        return data

    def built_model(self) -> MachineModel:
        """The model the tables describe, checked by the engine.

        Raises
        ------
        InputError
            ``"<Table> table, row N, column <Header>: machine model: <field> …"``; the
            cell is shaded and selected.
        """
        for t in self.tables.values():
            t.clear_marks()
        try:
            return MachineModel.from_dict(self.model_data())
        except InputError as exc:
            raise InputError(self._locate(str(exc))) from None

    def _locate(self, message: str) -> str:
        """Prefix ``message`` with the table cell it is about, and mark that cell."""
        m = _PART_RE.search(message)
        if m is None:
            for name, label in (("line_frequency_hz", "Line frequency"),
                                ("motor_shaft", "Motor shaft"), ("poles", "Poles")):
                if name in message:
                    return f"{label}: {message}"
            return message
        part, row = m.group(1), int(m.group(2))
        table = self.tables[part]
        rest = message[m.end():]
        chain = re.match(r"((?:\.\w+)+)", rest)     # ".geometry.elements", ".ratio"
        named = [k for k in reversed(chain.group(1).split(".")[1:]) if k in table.keys] \
            if chain else []
        found = [(rest.find(k), k) for k in table.keys
                 if k != "geometry" and re.search(rf"\b{k}\b", rest)]
        key = named[0] if named and named[0] != "geometry" else \
            (min(found)[1] if found else (named[0] if named else table.keys[0]))
        table.mark(row, key, message)
        table.focus_cell(row, key)
        header = table.columns[table.keys.index(key)].header
        return f"{table.name} table, row {row + 1}, column {header}: " \
               f"{message}"

    # -- derived columns ----------------------------------------------------------------
    def _mark_dirty(self, *_args) -> None:
        """The tables differ from the stored model (kept when the archive changes)."""
        if not self.dirty and self.site is not None:
            self.dirty = True
            self.status.setText(f"<b>{self.site}/{self.tag}</b> — <i>edited, not saved</i>")

    def _edited(self, row: int, key: str) -> None:
        self._mark_dirty()
        self._refresh_derived()
        if key == "name":
            self._refresh_motor_choices()

    def _refresh_derived(self) -> None:
        """Defect orders of each bearing row and the resolved shaft ratios."""
        for i, r in enumerate(self.bearings.rows()):
            try:
                orders = defect_orders(self._geometry(i, r)).as_dict()
                texts = {k: f"{orders[k]:.4f}" for k, _ in ORDER_COLUMNS}
                tip = ""
            except InputError as exc:
                texts = {k: "—" for k, _ in ORDER_COLUMNS}
                tip = str(exc)
            for k, _ in ORDER_COLUMNS:
                self.bearings.set_text(i, k, texts[k])
                self.bearings.mark(i, k, tip)
        try:
            ratios = MachineModel.from_dict(self.model_data()).ratios
        except InputError:
            ratios = {}
        for i, r in enumerate(self.shafts.rows()):
            v = ratios.get(r["name"])
            self.shafts.set_text(i, "resolved", "—" if v is None else f"{v:.5g}")

    def defect_orders_shown(self) -> list[dict[str, str]]:
        """Per bearing row: its location and the defect orders as shown."""
        return [{"label": r["label"], **{k: r[k] for k, _ in ORDER_COLUMNS}}
                for r in self.bearings.rows()]

    # -- bearing list -------------------------------------------------------------------
    def use_library_bearing(self, label: str) -> bool:
        """Copy the bearing list's ``label`` into the selected bearing row (a new row
        when none is selected)."""
        match = [b for b in self._library if b.label == label]
        if not match:
            self.message.emit("Pick a bearing of the bearing list first.")
            return False
        rows = sorted({ix.row() for ix in self.bearings.table.selectedIndexes()})
        row = rows[0] if rows else self.bearings.add_row(
            {"shaft": (self.shaft_names() or [""])[0], "label": ""})
        g = match[0]
        for k, v in self._bearing_row(self.bearings.text(row, "shaft"),
                                      self.bearings.text(row, "label"), g).items():
            self.bearings.set_text(row, k, v)
        self._refresh_derived()
        self._mark_dirty()
        return True

    def add_to_bearing_list(self) -> bool:
        """Store the selected bearing row's geometry in the archive's bearing list."""
        rows = sorted({ix.row() for ix in self.bearings.table.selectedIndexes()})
        if not rows:
            self.message.emit("Select a bearing row to add to the bearing list.")
            return False
        i = rows[0]
        try:
            g = self._geometry(i, self.bearings.rows()[i])
            known = {b.label: b for b in self._library}
            if g.label in known and known[g.label] == g:
                self.message.emit(f"{g.label!r} is already in the bearing list.")
                return False
            with self.ctx.writer("shaftwatch-gui bearing list") as arc:
                arc.add_bearing(g, replace=g.label in known)
        except EngineError as exc:
            self.last_error = dialogs.show_error(self.window(), "The bearing was not added",
                                                 str(exc), advice=dialogs.advice_for(str(exc)))
            return False
        self.ctx.reload()                   # the model edited here is kept (dirty)
        self._library = self.ctx.archive().bearing_library()
        current = self.library.currentText()
        self.library.clear()
        self.library.addItems([b.label for b in self._library])
        self.library.setCurrentText(current)
        self.message.emit(f"{g.label!r} is in the bearing list.")
        return True

    # -- saving -------------------------------------------------------------------------
    def save(self) -> bool:
        """Check the model and store it (and the machine's ISO group and foundation).

        Returns False, with an error dialog naming the field, when the model is refused;
        nothing is stored then.
        """
        if self.site is None:
            return False
        try:
            model = self.built_model()
            with self.ctx.writer("shaftwatch-gui machine model") as arc:
                arc.set_machine_model(self.site, self.tag, model)
                arc.update_machine(self.site, self.tag, iso_group=self.iso_group.currentData(),
                                   foundation=self.foundation.currentData())
        except EngineError as exc:
            self.status.setText(f"<span style='color:{self.ctx.palette.state('danger').name()}'>"
                                f"Not saved: {exc}</span>")
            self.last_error = dialogs.show_error(
                self.window(), "The machine model was not saved", str(exc),
                advice="Correct the marked cell and save again; nothing was stored.")
            return False
        site, tag = self.site, self.tag
        self.dirty = False
        self.message.emit(f"Machine model of {site}/{tag} saved.")
        self.ctx.reload()
        self.saved.emit(site, tag)
        return True
