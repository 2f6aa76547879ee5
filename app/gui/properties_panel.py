"""Exact values of the selected receiver spot, wheel, panel zone and mounting region.

Every change is one undoable edit made through ``Document.apply`` with a pure function of
``app.gui.edits``; the new vehicle is validated exactly like a loaded file (``core.vehicle``), so a
refused value leaves the document unchanged and the panel shows the located message (field path and
problem). Display units at the edge: mm in the widgets, m in the file. Tire sizes are ISO metric
codes read by ``core.tires`` (overall diameter = rim[in] x 25.4 + 2 x width x aspect / 100 mm,
ISO 4000-1 / ETRTO).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractSpinBox,
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QGroupBox,
    QLabel,
    QLineEdit,
    QVBoxLayout,
    QWidget,
)

from app.gui import edits
from app.gui.document import Document
from core.vehicle import Vehicle

MM_PER_M = 1000.0
#: widget range of positions, mm: wider than the file's limits, so that the file's own check refuses
POSITION_RANGE_MM = 200_000.0
#: the receiver axis choices of a spot: None follows the Receiver antenna setting
SPOT_AXES = (("as the Receiver antenna setting", None), ("x, forward", (1.0, 0.0, 0.0)),
             ("y, left", (0.0, 1.0, 0.0)), ("z, up", (0.0, 0.0, 1.0)), ("own vector (below)", "own"))


def axis_text(axis) -> str:
    """An axis (3 components) as short text, e.g. '(0, 0.71, 0.71)' (unit vector, 2 decimals)."""
    a = np.asarray(axis, float)
    a = a / np.linalg.norm(a)
    return "(" + ", ".join(f"{c:.2f}".rstrip("0").rstrip(".") if abs(c) >= 5e-3 else "0" for c in a) + ")"


def spot_axis_note(v: Vehicle, name: str) -> str:
    """'own (x, y, z)' when the spot's own axis overrides the Receiver antenna setting, '' when it follows it."""
    for s in v.spots:
        if s.name == name:
            return f"own {axis_text(s.axis)}" if s.axis is not None else ""
    return ""


def parse_axis(text: str) -> tuple[float, float, float]:
    """'ax, ay, az' (commas or spaces) -> three floats; ValueError with a plain message otherwise."""
    parts = text.replace(",", " ").split()
    try:
        vals = tuple(float(p) for p in parts)
    except ValueError:
        raise ValueError(f"{text!r} is not three numbers (e.g. '0, 0.7, 0.7')") from None
    if len(vals) != 3 or not np.all(np.isfinite(vals)) or float(np.linalg.norm(vals)) == 0.0:
        raise ValueError(f"{text!r} is not a direction: give three numbers, not all zero (e.g. '0, 0.7, 0.7')")
    return vals  # type: ignore[return-value]


def _mm(tip: str, lo: float = -POSITION_RANGE_MM, hi: float = POSITION_RANGE_MM, decimals: int = 1) -> QDoubleSpinBox:
    w = QDoubleSpinBox()
    w.setRange(lo, hi)
    w.setDecimals(decimals)
    w.setSingleStep(10.0)
    w.setSuffix(" mm")
    w.setToolTip(tip)
    w.setKeyboardTracking(False)  # one edit when the value is entered, not one per key
    w.setButtonSymbols(QAbstractSpinBox.ButtonSymbols.UpDownArrows)
    return w


def _line(tip: str, placeholder: str = "") -> QLineEdit:
    w = QLineEdit()
    w.setToolTip(tip)
    w.setPlaceholderText(placeholder)
    return w


def _choice(tip: str) -> QComboBox:
    w = QComboBox()
    w.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    w.setMinimumContentsLength(8)
    w.setToolTip(tip)
    return w


def _set_text(w: QLineEdit, text: str) -> None:
    if w.text() != text:
        w.setText(text)
        w.setCursorPosition(0)


class PropertiesPanel(QWidget):
    """Typed values of the selected spot, wheel, zone and region (one undoable edit per change)."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self._loading = False
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        # one message line per group, shown in the group where a value was refused (in view of the field)
        self.messages: dict[str, QLabel] = {}
        for where in ("spot", "wheel", "zone", "region"):
            m = QLabel("")
            m.setWordWrap(True)
            m.setStyleSheet("color: #a3141e")
            m.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            m.setToolTip("The last value that was refused, with the field and the reason; the document is unchanged")
            m.hide()
            self.messages[where] = m
        self.message = self.messages["spot"]  # the message shown last

        g = QGroupBox("Receiver spot")
        f = QFormLayout(g)
        f.addRow(self.messages["spot"])
        self.spot_choice = _choice("The selected receiver spot (also chosen by clicking it in a view or the table)")
        self.spot_name = _line("Name of the spot (unique in the file)")
        self.spot_x = _mm("x, forward, mm from the origin (ground below the front axle centre), ISO 8855 vehicle axes")
        self.spot_y = _mm("y, left, mm from the vehicle centre line (negative: right side)")
        self.spot_z = _mm("z, up, mm above the ground")
        self.spot_axis = _choice("The receiver antenna axis at this spot: the Receiver antenna setting, or the spot's own "
                                 "axis, which overrides the setting for this spot")
        for label, data in SPOT_AXES:
            self.spot_axis.addItem(label, data)
        self.spot_axis_vector = _line("The spot's own antenna axis as three components x, y, z (any length; "
                                      "stored as given, used as a unit vector), e.g. '0, 0.7, 0.7'", "x, y, z")
        self.spot_note = QLabel("")
        self.spot_note.setWordWrap(True)
        f.addRow("Spot", self.spot_choice)
        f.addRow("Name", self.spot_name)
        f.addRow("x, forward", self.spot_x)
        f.addRow("y, left", self.spot_y)
        f.addRow("z, up", self.spot_z)
        f.addRow("Receiver axis", self.spot_axis)
        f.addRow("Own axis", self.spot_axis_vector)
        f.addRow(self.spot_note)
        lay.addWidget(g)
        self.spot_group = g

        g = QGroupBox("Wheel")
        f = QFormLayout(g)
        f.addRow(self.messages["wheel"])
        self.wheel_choice = _choice("The wheel shown here (also chosen by clicking a wheel in the top view)")
        self.wheel_x = _mm("Wheel centre x, forward, mm from the origin (ground below the front axle centre)")
        self.wheel_y = _mm("Wheel centre y, left, mm from the centre line (negative: right side)")
        self.wheel_tire = _line("Tire size as an ISO metric code, e.g. 225/50R17 or LT235/80R17: section width mm / "
                                "aspect ratio % R rim diameter in (ISO 4000-1, ETRTO)", "e.g. 225/50R17")
        self.wheel_rim_width = _mm("Rim width (between the flanges), mm", lo=0.0, hi=2000.0)
        self.wheel_sizes = QLabel("")
        self.wheel_sizes.setWordWrap(True)
        self.wheel_sizes.setToolTip("From the tire code: overall diameter = rim[in] x 25.4 + 2 x width x aspect / 100 mm "
                                    "(ISO 4000-1, ETRTO); the centre height is the unloaded tire radius")
        f.addRow("Wheel", self.wheel_choice)
        f.addRow("x, forward", self.wheel_x)
        f.addRow("y, left", self.wheel_y)
        f.addRow("Tire", self.wheel_tire)
        f.addRow("Rim width", self.wheel_rim_width)
        f.addRow(self.wheel_sizes)
        lay.addWidget(g)

        g = QGroupBox("Panel zone")
        f = QFormLayout(g)
        f.addRow(self.messages["zone"])
        self.zone_choice = _choice("The selected panel zone (also chosen in the Zones and regions tab)")
        self.zone_name = _line("Name of the zone")
        self.zone_material = _choice("Material of the panels the zone covers (built-in or defined in the file)")
        self.zone_z_min = _line("Top-view zones only: the lowest height the zone applies to, mm above the ground; "
                                "empty: no limit", "no limit")
        self.zone_z_max = _line("Top-view zones only: the highest height the zone applies to, mm above the ground; "
                                "empty: no limit", "no limit")
        f.addRow("Zone", self.zone_choice)
        f.addRow("Name", self.zone_name)
        f.addRow("Material", self.zone_material)
        f.addRow("Lowest z, mm", self.zone_z_min)
        f.addRow("Highest z, mm", self.zone_z_max)
        lay.addWidget(g)

        g = QGroupBox("Mounting region")
        f = QFormLayout(g)
        f.addRow(self.messages["region"])
        self.region_choice = _choice("The mounting region of the heatmap")
        self.region_name = _line("Name of the region")
        self.region_fixed = _mm("Height z of a top-view region, or lateral position y of a side-view region, mm")
        self.region_fixed_label = QLabel("Height z")
        f.addRow("Region", self.region_choice)
        f.addRow("Name", self.region_name)
        f.addRow(self.region_fixed_label, self.region_fixed)
        lay.addWidget(g)
        lay.addStretch(1)

        self.spot_choice.activated.connect(lambda i: self.doc.select(self.spot_choice.itemData(i)))
        self.spot_name.editingFinished.connect(self._spot_renamed)
        for i, w in enumerate((self.spot_x, self.spot_y, self.spot_z)):
            w.valueChanged.connect(lambda mm, i=i: self._spot_moved(i, mm))
        self.spot_axis.activated.connect(self._spot_axis_chosen)
        self.spot_axis_vector.editingFinished.connect(self._spot_axis_typed)
        self.wheel_choice.activated.connect(lambda i: self.doc.select_wheel(self.wheel_choice.itemData(i)))
        self.wheel_x.valueChanged.connect(lambda mm: self._wheel_value("x_m", mm / MM_PER_M, "x"))
        self.wheel_y.valueChanged.connect(lambda mm: self._wheel_value("y_m", mm / MM_PER_M, "y"))
        self.wheel_tire.editingFinished.connect(self._tire_typed)
        self.wheel_rim_width.valueChanged.connect(lambda mm: self._wheel_value("rim_width_m", mm / MM_PER_M, "rim width"))
        self.zone_choice.activated.connect(lambda i: self.doc.select_zone(self.zone_choice.itemData(i)))
        self.zone_name.editingFinished.connect(lambda: self._zone_value("name", self.zone_name.text().strip(), "name"))
        self.zone_material.activated.connect(lambda i: self._zone_value("material", self.zone_material.itemData(i),
                                                                        "material"))
        self.zone_z_min.editingFinished.connect(lambda: self._zone_height("z_min_m", self.zone_z_min, "lowest z"))
        self.zone_z_max.editingFinished.connect(lambda: self._zone_height("z_max_m", self.zone_z_max, "highest z"))
        self.region_choice.activated.connect(lambda i: self.doc.select_region(i))
        self.region_name.editingFinished.connect(self._region_renamed)
        self.region_fixed.valueChanged.connect(self._region_fixed)

        doc.vehicleChanged.connect(self.refresh)
        doc.selectionChanged.connect(lambda _n: self._selection_changed())
        doc.wheelSelectionChanged.connect(lambda _w: self._selection_changed())
        doc.zoneSelectionChanged.connect(lambda _i: self._selection_changed())
        doc.regionSelectionChanged.connect(lambda _i: self._selection_changed())
        self.refresh()

    # ----- the edit of one value -------------------------------------------------------
    def edit(self, make: Callable[[Vehicle], Vehicle], text: str, where: str = "spot") -> bool:
        """Apply one edit through the document; a refusal shows the document's located message in the
        group ``where`` ('spot', 'wheel', 'zone' or 'region')."""
        said: list[str] = []
        self.doc.statusMessage.connect(said.append)
        try:
            ok = self.doc.apply(make, text)
        finally:
            self.doc.statusMessage.disconnect(said.append)
        if ok:
            self._hide_messages()
        else:
            why = said[-1] if said else f"Edit refused ({text})"
            self._say(where, f"{why}. Nothing was changed.")
        return ok

    def _say(self, where: str, text: str) -> None:
        self._hide_messages()
        self.message = self.messages[where]
        self.message.setText(text)
        self.message.show()

    def _hide_messages(self) -> None:
        for m in self.messages.values():
            m.hide()
            m.setText("")

    def _selection_changed(self) -> None:
        self._hide_messages()
        self.refresh()

    # ----- spot ----------------------------------------------------------------------------
    def _spot(self):
        v = self.doc.vehicle
        for s in v.spots:
            if s.name == self.doc.selected:
                return s
        return None

    def _spot_renamed(self) -> None:
        s = self._spot()
        new = self.spot_name.text().strip()
        if self._loading or s is None or new == s.name:
            return
        old = s.name
        if self.edit(lambda v: edits.rename_spot(v, old, new), f"Rename spot '{old}' to '{new}'"):
            self.doc.select(new)
        else:
            self.refresh()

    def _spot_moved(self, i: int, mm: float) -> None:
        s = self._spot()
        if self._loading or s is None:
            return
        pos = list(self.doc.vehicle.resolve_spot(s))
        value = mm / MM_PER_M
        if abs(pos[i] - value) <= 1e-7:  # the widget shows 0.1 mm: an unchanged value is no edit
            return
        pos[i] = value
        name = s.name
        self.edit(lambda v: edits.move_spot(v, name, tuple(pos)), f"Move spot '{name}' ({'xyz'[i]} {mm:.1f} mm)")

    def _spot_axis_chosen(self, index: int) -> None:
        s = self._spot()
        data = self.spot_axis.itemData(index)
        if self._loading or s is None:
            return
        if data == "own":
            self.spot_axis_vector.setEnabled(True)
            self.spot_axis_vector.setFocus()
            return
        axis = None if data is None else tuple(data)
        name = s.name
        what = "the Receiver antenna setting" if axis is None else axis_text(axis)
        self.edit(lambda v: edits.set_spot_axis(v, name, axis), f"Spot '{name}' receiver axis: {what}")

    def _spot_axis_typed(self) -> None:
        s = self._spot()
        text = self.spot_axis_vector.text().strip()
        if self._loading or s is None or not text:
            return
        try:
            axis = parse_axis(text)
        except ValueError as e:
            self._say("spot", f"Edit refused (spot '{s.name}' own axis): {e}. Nothing was changed.")
            return
        if s.axis is not None and np.allclose(axis, s.axis):
            return
        name = s.name
        self.edit(lambda v: edits.set_spot_axis(v, name, axis), f"Spot '{name}' receiver axis: {axis_text(axis)}")

    # ----- wheel ---------------------------------------------------------------------------
    def _wheel(self):
        v = self.doc.vehicle
        for w in v.wheels:
            if w.id == self.doc.selected_wheel:
                return w
        return v.wheels[0]

    def _wheel_value(self, key: str, value: float, what: str) -> None:
        w = self._wheel()
        if self._loading or abs(getattr(w, key) - value) <= 1e-7:
            return
        wid = w.id
        self.edit(lambda v: edits.set_wheel_value(v, wid, key, value), f"Wheel {wid} {what} {value * MM_PER_M:.1f} mm",
                  "wheel")

    def _tire_typed(self) -> None:
        w = self._wheel()
        code = self.wheel_tire.text().strip()
        if self._loading or not code or code == w.tire:
            return
        wid = w.id
        self.edit(lambda v: edits.set_wheel_value(v, wid, "tire", code), f"Wheel {wid} tire {code}", "wheel")
        self.refresh()  # a refused code: the box shows the stored tire again

    # ----- zone and region -----------------------------------------------------------------
    def _zone_value(self, key: str, value, what: str) -> None:
        i = self.doc.selected_zone
        if self._loading or not 0 <= i < len(self.doc.vehicle.zones) or value is None:
            return
        z = self.doc.vehicle.zones[i]
        if getattr(z, key) == value:
            return
        self.edit(lambda v: edits.set_item_value(v, "zones", i, key, value), f"Zone '{z.name}' {what} {value}", "zone")
        self.refresh()

    def _zone_height(self, key: str, box: QLineEdit, what: str) -> None:
        i = self.doc.selected_zone
        if self._loading or not 0 <= i < len(self.doc.vehicle.zones):
            return
        text = box.text().strip()
        z = self.doc.vehicle.zones[i]
        if text:
            try:
                value = float(text.replace("mm", "").strip()) / MM_PER_M
            except ValueError:
                self._say("zone", f"Edit refused (zone '{z.name}' {what}): {text!r} is not a number of mm. "
                                  "Nothing was changed.")
                return
        else:
            value = None
        old = getattr(z, key)
        if (old is None and value is None) or (old is not None and value is not None and abs(old - value) <= 1e-7):
            return
        shown = "no limit" if value is None else f"{value * MM_PER_M:.0f} mm"
        self.edit(lambda v: edits.set_item_value(v, "zones", i, key, value), f"Zone '{z.name}' {what} {shown}", "zone")
        self.refresh()

    def _region_renamed(self) -> None:
        v = self.doc.vehicle
        new = self.region_name.text().strip()
        if self._loading or not v.regions:
            return
        i = self.doc.region_index
        if new == v.regions[i].name:
            return
        self.edit(lambda vv: edits.set_item_value(vv, "regions", i, "name", new), f"Rename region to '{new}'", "region")
        self.refresh()

    def _region_fixed(self, mm: float) -> None:
        v = self.doc.vehicle
        if self._loading or not v.regions:
            return
        i = self.doc.region_index
        r = v.regions[i]
        old = r.height_m if r.view == "top" else r.lateral_m
        if old is not None and abs(old - mm / MM_PER_M) <= 1e-7:
            return
        what = "height z" if r.view == "top" else "lateral y"
        self.edit(lambda vv: edits.set_region_fixed(vv, i, mm / MM_PER_M), f"Region '{r.name}' {what} {mm:.0f} mm",
                  "region")

    # ----- show the document ---------------------------------------------------------------
    def refresh(self) -> None:
        self._loading = True
        try:
            self._refresh_spot()
            self._refresh_wheel()
            self._refresh_zone()
            self._refresh_region()
        finally:
            self._loading = False

    def _refresh_spot(self) -> None:
        v = self.doc.vehicle
        self.spot_choice.clear()
        for i, s in enumerate(v.spots):
            self.spot_choice.addItem(f"{i + 1}  {s.name}", s.name)
        s = self._spot()
        for w in (self.spot_name, self.spot_x, self.spot_y, self.spot_z, self.spot_axis, self.spot_axis_vector):
            w.setEnabled(s is not None)
        if s is None:
            self.spot_choice.setCurrentIndex(-1)
            self.spot_note.setText("No spot selected: click a spot in a view or in the table.")
            return
        self.spot_choice.setCurrentIndex(self.spot_choice.findData(s.name))
        _set_text(self.spot_name, s.name)
        for w, c in zip((self.spot_x, self.spot_y, self.spot_z), v.resolve_spot(s)):
            w.setValue(c * MM_PER_M)
        notes = []
        if s.axis is None:
            self.spot_axis.setCurrentIndex(0)
            _set_text(self.spot_axis_vector, "")
            self.spot_axis_vector.setEnabled(False)
            notes.append(f"Receiver axis: the Receiver antenna setting {axis_text(v.radio.receiver.axis)}.")
        else:
            unit = tuple(float(c) for c in v.spot_axis(s))
            k = next((k for k, (_l, d) in enumerate(SPOT_AXES) if d not in (None, "own") and np.allclose(d, unit)), 4)
            self.spot_axis.setCurrentIndex(k)
            _set_text(self.spot_axis_vector, ", ".join(f"{c:g}" for c in s.axis))
            notes.append(f"Receiver axis: own {axis_text(s.axis)}, overriding the Receiver antenna setting "
                         f"{axis_text(v.radio.receiver.axis)} for this spot.")
        if s.x_from != "origin" or s.z_from != "ground":
            notes.append(f"The file stores x from the {s.x_from.replace('_', ' ')} and z from the {s.z_from}; shown "
                         "here from the origin and the ground (the stored offsets follow).")
        self.spot_note.setText(" ".join(notes))

    def _refresh_wheel(self) -> None:
        v = self.doc.vehicle
        self.wheel_choice.clear()
        for w in v.wheels:
            self.wheel_choice.addItem(w.id, w.id)
        w = self._wheel()
        self.wheel_choice.setCurrentIndex(self.wheel_choice.findData(w.id))
        self.wheel_x.setValue(w.x_m * MM_PER_M)
        self.wheel_y.setValue(w.y_m * MM_PER_M)
        self.wheel_rim_width.setValue(w.rim_width_m * MM_PER_M)
        t = w.tire_size
        if isinstance(w.tire, str):
            _set_text(self.wheel_tire, w.tire)
            src = "from the code"
        else:
            _set_text(self.wheel_tire, "")
            src = "explicit sizes in the file (type a code to replace them)"
        self.wheel_sizes.setText(
            f"Tire {src}: overall diameter {t.outer_diameter_m * MM_PER_M:.1f} mm, rim diameter "
            f"{t.rim_diameter_m / 0.0254:.1f} in ({t.rim_diameter_m * MM_PER_M:.1f} mm), section width "
            f"{t.section_width_m * MM_PER_M:.0f} mm; centre height z {w.centre_z_m * MM_PER_M:.1f} mm.")

    def _refresh_zone(self) -> None:
        v = self.doc.vehicle
        self.zone_choice.clear()
        self.zone_choice.addItem("(none)", -1)
        for i, z in enumerate(v.zones):
            self.zone_choice.addItem(f"{z.name} ({z.view} view)", i)
        i = self.doc.selected_zone
        ok = 0 <= i < len(v.zones)
        self.zone_choice.setCurrentIndex(i + 1 if ok else 0)
        self.zone_material.clear()
        for m in sorted(v.material_names()):
            self.zone_material.addItem(m, m)
        for w in (self.zone_name, self.zone_material, self.zone_z_min, self.zone_z_max):
            w.setEnabled(ok)
        if not ok:
            for w in (self.zone_name, self.zone_z_min, self.zone_z_max):
                _set_text(w, "")
            self.zone_material.setCurrentIndex(-1)
            return
        z = v.zones[i]
        _set_text(self.zone_name, z.name)
        self.zone_material.setCurrentIndex(self.zone_material.findData(z.material))
        for w, val in ((self.zone_z_min, z.z_min_m), (self.zone_z_max, z.z_max_m)):
            _set_text(w, "" if val is None else f"{val * MM_PER_M:.0f}")
            w.setEnabled(z.view == "top")

    def _refresh_region(self) -> None:
        v = self.doc.vehicle
        self.region_choice.clear()
        for r in v.regions:
            self.region_choice.addItem(f"{r.name} ({r.view} view)")
        for w in (self.region_name, self.region_fixed):
            w.setEnabled(bool(v.regions))
        if not v.regions:
            _set_text(self.region_name, "")
            return
        r = v.regions[self.doc.region_index]
        self.region_choice.setCurrentIndex(self.doc.region_index)
        _set_text(self.region_name, r.name)
        top = r.view == "top"
        self.region_fixed_label.setText("Height z" if top else "Lateral y")
        val = r.height_m if top else r.lateral_m
        self.region_fixed.setValue((val or 0.0) * MM_PER_M)
