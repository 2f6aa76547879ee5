"""Radio and materials settings, and the zone/region editor, written through the document's undo stack.

Display units at the edge only: MHz, km/h and ms in the widgets; Hz, m/s and s in the file.
"""

from __future__ import annotations

import importlib.util
from collections.abc import Callable

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractSpinBox,
    QCheckBox,
    QComboBox,
    QDoubleSpinBox,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QListWidget,
    QPushButton,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.gui import edits
from app.gui.document import Document
from core.materials import BUILTIN_MATERIALS, ROAD_SURFACES, material_loss_db
from core.regulatory import EIRP_PRESETS, check_sensor_eirp

KMH_PER_MPS = 3.6
FREQUENCY_PRESETS_MHZ = (("315 MHz band", 315.0), ("433.92 MHz band", 433.92))
AXES = (("x, forward", (1.0, 0.0, 0.0)), ("y, left", (0.0, 1.0, 0.0)), ("z, up", (0.0, 0.0, 1.0)))
SENSOR_AXES = (("radial", "radial"), ("tangential", "tangential"), ("axial (along the wheel axle)", "axial"))
PATTERNS = (("short dipole", "dipole"), ("isotropic", "isotropic"))
MARKETS = (("market by band", None), ("US: 47 CFR 15.231(b)", "US"), ("EU: ERC/REC 70-03, EN 300 220", "EU"))


def installed_pattern_available() -> bool:
    """True when the engine ships the installed wheel pattern model (core.wheel_patterns)."""
    return importlib.util.find_spec("core.wheel_patterns") is not None


def _spin(lo: float, hi: float, decimals: int, step: float, suffix: str, tip: str) -> QDoubleSpinBox:
    w = QDoubleSpinBox()
    w.setRange(lo, hi)
    w.setDecimals(decimals)
    w.setSingleStep(step)
    w.setSuffix(suffix)
    w.setToolTip(tip)
    w.setKeyboardTracking(False)
    w.setButtonSymbols(QAbstractSpinBox.ButtonSymbols.UpDownArrows)
    return w


def _ispin(lo: int, hi: int, tip: str, suffix: str = "") -> QSpinBox:
    w = QSpinBox()
    w.setRange(lo, hi)
    w.setToolTip(tip)
    w.setSuffix(suffix)
    w.setKeyboardTracking(False)
    return w


def _compact(w: QComboBox) -> QComboBox:
    """Let a combo box shrink to the panel's width (long entries are elided in the closed box)."""
    w.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    w.setMinimumContentsLength(6)
    return w


def _combo(items, tip: str) -> QComboBox:
    w = _compact(QComboBox())
    for label, data in items:
        w.addItem(label, data)
    w.setToolTip(tip)
    return w


class RadioPanel(QWidget):
    """Frequency, sensor, receiver, scoring and burst settings; material crossing losses."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self._loading = False
        self._refreshers: list[Callable[[], None]] = []
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)

        # --- band and sensor
        g = QGroupBox("Band and wheel sensor")
        f = QFormLayout(g)
        self.freq_preset = _combo([("free entry", None)] + [(t, v) for t, v in FREQUENCY_PRESETS_MHZ],
                                  "Common tire-pressure sensor bands (315 MHz: North America and others; 433.92 MHz: Europe and others)")
        self.freq = _spin(1.0, 10000.0, 3, 0.01, " MHz", "Carrier frequency, MHz (stored in Hz)")
        self.freq.setMinimumWidth(110)
        row = QHBoxLayout()
        row.addWidget(self.freq, 1)
        row.addWidget(self.freq_preset, 1)
        f.addRow("Frequency", row)
        self.eirp = _spin(-80.0, 40.0, 2, 0.5, " dBm", "Sensor peak EIRP, dBm (effective isotropic radiated power)")
        self.eirp_preset = _compact(QComboBox())
        self.eirp_preset.setToolTip("Radio-rule EIRP ceilings (convenience only; the rules of each market apply)")
        self.eirp_preset.addItem("ceiling presets...", None)
        for p in EIRP_PRESETS:
            self.eirp_preset.addItem(f"{p.label}: {p.eirp_dbm:.1f} dBm", p.eirp_dbm)
            self.eirp_preset.setItemData(self.eirp_preset.count() - 1, p.source, Qt.ItemDataRole.ToolTipRole)
        f.addRow("Sensor EIRP", self.eirp)
        f.addRow("", self.eirp_preset)
        self.market = _combo(MARKETS, "Market whose radio limit the sensor EIRP is checked against (by band: EU inside "
                                      "433.05-434.79 MHz, US elsewhere in 260-470 MHz)")
        f.addRow("Radio limit", self.market)
        self.limit_status = QLabel()
        self.limit_status.setWordWrap(True)
        f.addRow("", self.limit_status)
        self.sensor_pattern = _combo(PATTERNS, "Sensor antenna pattern")
        self.sensor_axis = _combo(SENSOR_AXES, "Sensor antenna axis in the wheel frame (turns with the wheel)")
        row = QHBoxLayout()
        row.addWidget(self.sensor_pattern)
        row.addWidget(self.sensor_axis)
        f.addRow("Sensor antenna", row)
        self.return_loss = _spin(0.1, 60.0, 1, 0.5, " dB", "Sensor antenna return loss, dB (mismatch loss = -10 log10(1 - 10^(-RL/10)))")
        f.addRow("Return loss", self.return_loss)
        wheel_models = [("knife edge over the rim flange", "knife_edge")]
        if installed_pattern_available():
            wheel_models.append(("installed pattern (full-wave table)", "installed_pattern"))
        self.wheel_model = _combo(wheel_models, "How the rim and tire act on the sensor's radiation")
        f.addRow("Wheel model", self.wheel_model)
        self.wheel_model_status = QLabel()
        self.wheel_model_status.setWordWrap(True)
        f.addRow("", self.wheel_model_status)
        lay.addWidget(g)

        # --- receiver and scoring
        g = QGroupBox("Receiver and scoring")
        f = QFormLayout(g)
        self.rx_gain = _spin(-40.0, 20.0, 1, 0.5, " dBi", "Receiver antenna peak gain, dBi")
        self.rx_pattern = _combo(PATTERNS, "Receiver antenna pattern")
        self.rx_axis = _combo(AXES, "Receiver antenna axis in vehicle axes (a spot may set its own)")
        row = QHBoxLayout()
        row.addWidget(self.rx_pattern)
        row.addWidget(self.rx_axis)
        f.addRow("Receiver gain", self.rx_gain)
        f.addRow("Receiver antenna", row)
        self.sensitivity = _spin(-160.0, 0.0, 1, 1.0, " dBm", "Receiver sensitivity, dBm")
        f.addRow("Sensitivity", self.sensitivity)
        self.required = _spin(-50.0, 50.0, 1, 0.5, " dB", "Margin required above the sensitivity, dB")
        f.addRow("Required margin", self.required)
        self.angles = _ispin(4, 3600, "Wheel angles computed per turn")
        f.addRow("Angles per turn", self.angles)
        lay.addWidget(g)

        # --- burst and road
        g = QGroupBox("Burst and road")
        f = QFormLayout(g)
        self.frames = _ispin(1, 100, "Frames sent per burst")
        self.interval = _spin(1.0, 10000.0, 0, 10.0, " ms", "Time between frame starts, ms (stored in s)")
        row = QHBoxLayout()
        row.addWidget(self.frames)
        row.addWidget(QLabel("frames every"))
        row.addWidget(self.interval)
        f.addRow("Burst", row)
        self.frame_ms = _spin(0.0, 1000.0, 1, 1.0, " ms", "On-air time of one frame, ms (stored in s); 0 = not given. "
                              "Sets the averaging of the peak EIRP against an average limit (47 CFR 15.35)")
        self.frame_ms.setSpecialValueText("not given")
        self.period = _spin(0.0, 86400.0, 1, 10.0, " s", "Time from one burst to the next, s; 0 = not given. "
                            "Sets the duty cycle checked against EN 300 220")
        self.period.setSpecialValueText("not given")
        row = QHBoxLayout()
        row.addWidget(self.frame_ms)
        row.addWidget(QLabel("burst every"))
        row.addWidget(self.period)
        f.addRow("Frame", row)
        self.speed_min = _spin(0.0, 360.0, 0, 5.0, " km/h", "Lowest vehicle speed of the burst sweep, km/h (stored in m/s)")
        self.speed_max = _spin(0.0, 360.0, 0, 5.0, " km/h", "Highest vehicle speed of the burst sweep, km/h (stored in m/s)")
        row = QHBoxLayout()
        row.addWidget(self.speed_min)
        row.addWidget(QLabel("to"))
        row.addWidget(self.speed_max)
        f.addRow("Speeds", row)
        self.ground = QCheckBox("two-ray road reflection")
        self.ground.setToolTip("Add the wave reflected by the road (Fresnel coefficient of the road surface)")
        f.addRow("Ground", self.ground)
        self.road = _compact(QComboBox())
        for name, rs in ROAD_SURFACES.items():
            self.road.addItem(name, name)
            self.road.setItemData(self.road.count() - 1, rs.note, Qt.ItemDataRole.ToolTipRole)
        self.road.setToolTip("Road material (ITU-R P.2040 rows; extrapolated below 1 GHz)")
        f.addRow("Road surface", self.road)
        lay.addWidget(g)

        # --- materials
        g = QGroupBox("Panel crossing loss")
        v = QVBoxLayout(g)
        self.materials = QTableWidget(0, 3)
        self._materials_key = None  # what the materials table shows (_fill_materials)
        self.materials.setHorizontalHeaderLabels(["material", "model dB", "file dB"])
        self.materials.verticalHeader().setVisible(False)
        self.materials.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.materials.setToolTip("Loss of one crossing of a panel of each material at the current frequency, dB.\n"
                                  "Set a value in the last column to override the model for this file.")
        v.addWidget(self.materials)
        lay.addWidget(g)
        lay.addStretch(1)

        self._wire()
        doc.vehicleChanged.connect(self.refresh)
        self.refresh()

    # ----- wiring ----------------------------------------------------------------------
    def _edit(self, path: str, value, text: str) -> None:
        if self._loading:
            return
        self.doc.apply(lambda v: edits.set_radio(v, path, value), text)

    def _wire(self) -> None:
        self.freq.valueChanged.connect(lambda x: self._edit("frequency_hz", round(x * 1e6, 1), f"Frequency {x:g} MHz"))
        self.freq_preset.activated.connect(self._freq_preset)
        self.eirp.valueChanged.connect(lambda x: self._edit("sensor.eirp_dbm", x, f"Sensor EIRP {x:g} dBm"))
        self.eirp_preset.activated.connect(self._eirp_preset)
        self.sensor_pattern.activated.connect(lambda _i: self._edit("sensor.pattern", self.sensor_pattern.currentData(), "Sensor pattern"))
        self.sensor_axis.activated.connect(lambda _i: self._edit("sensor.axis", self.sensor_axis.currentData(), "Sensor antenna axis"))
        self.return_loss.valueChanged.connect(lambda x: self._edit("sensor.return_loss_db", x, "Sensor return loss"))
        self.wheel_model.activated.connect(lambda _i: self._edit("wheel_model", self.wheel_model.currentData(), "Wheel model"))
        self.rx_gain.valueChanged.connect(lambda x: self._edit("receiver.gain_dbi", x, "Receiver gain"))
        self.rx_pattern.activated.connect(lambda _i: self._edit("receiver.pattern", self.rx_pattern.currentData(), "Receiver pattern"))
        self.rx_axis.activated.connect(lambda _i: self._edit("receiver.axis", list(self.rx_axis.currentData()), "Receiver axis"))
        self.sensitivity.valueChanged.connect(lambda x: self._edit("receiver.sensitivity_dbm", x, "Receiver sensitivity"))
        self.required.valueChanged.connect(lambda x: self._edit("required_margin_db", x, "Required margin"))
        self.angles.valueChanged.connect(lambda n: self._edit("angles_per_turn", n, "Angles per turn"))
        self.frames.valueChanged.connect(lambda n: self._edit("frames_per_burst", n, "Frames per burst"))
        self.interval.valueChanged.connect(lambda x: self._edit("frame_interval_s", x / 1000.0, "Frame interval"))
        self.frame_ms.valueChanged.connect(lambda x: self._edit("frame_duration_s", x / 1000.0 if x > 0 else None,
                                                                "Frame duration"))
        self.period.valueChanged.connect(lambda x: self._edit("burst_period_s", x if x > 0 else None, "Burst period"))
        self.market.activated.connect(lambda _i: self._edit("market", self.market.currentData(), "Radio-limit market"))
        self.speed_min.valueChanged.connect(lambda x: self._edit("speed_min_mps", x / KMH_PER_MPS, "Lowest speed"))
        self.speed_max.valueChanged.connect(lambda x: self._edit("speed_max_mps", x / KMH_PER_MPS, "Highest speed"))
        self.ground.toggled.connect(lambda on: self._edit("ground_reflection", bool(on), "Road reflection " + ("on" if on else "off")))
        self.road.activated.connect(lambda _i: self._edit("road_surface", self.road.currentData(), "Road surface"))

    def _freq_preset(self, _i: int) -> None:
        mhz = self.freq_preset.currentData()
        if mhz is not None:
            self._edit("frequency_hz", mhz * 1e6, f"Frequency {mhz:g} MHz")

    def _eirp_preset(self, _i: int) -> None:
        dbm = self.eirp_preset.currentData()
        if dbm is not None:
            self._edit("sensor.eirp_dbm", round(float(dbm), 2), f"Sensor EIRP {dbm:.1f} dBm (ceiling preset)")
        self.eirp_preset.setCurrentIndex(0)

    def _override(self, name: str, spin: QDoubleSpinBox) -> None:
        if self._loading:
            return
        val = spin.value()
        if -1.0 < val < 0.0:
            # one step up from "model" (-1): the override starts at the model's value at this frequency
            # (rounded to the box's 0.1 dB), so the arrow visibly starts from where the model is
            val = round(float(material_loss_db(name, self.doc.vehicle.radio.frequency_hz)), 1) \
                if name in BUILTIN_MATERIALS else 0.0
        loss = None if val < 0 else val
        text = f"Crossing loss of {name}" + (" (model)" if loss is None else f" {loss:g} dB")
        self.doc.apply(lambda v: edits.set_material_override(v, name, loss), text)

    # ----- document -> widgets ---------------------------------------------------------
    def _show_wheel_model_in_use(self) -> None:
        """The wheel model the engine uses (the scene's), and why when it is not the one chosen."""
        scene = self.doc.scene
        if scene.wheel_model_fallback:
            self.wheel_model_status.setText(f"In use: knife edge (fallback). Reason: {scene.wheel_model_fallback}")
            self.wheel_model_status.setStyleSheet("color: #b00000; font-weight: bold")
        else:
            self.wheel_model_status.setText(f"In use: {scene.wheel_model_label}")
            self.wheel_model_status.setStyleSheet("color: #404040")
        self.wheel_model_status.setToolTip(f"Wheel model of the engine's scene: {scene.wheel_model_label}")

    def refresh(self) -> None:
        self._loading = True
        try:
            v = self.doc.vehicle
            r = v.radio
            mhz = r.frequency_hz / 1e6
            self.freq.setValue(mhz)
            k = next((i + 1 for i, (_t, m) in enumerate(FREQUENCY_PRESETS_MHZ) if abs(m - mhz) < 1e-6), 0)
            self.freq_preset.setCurrentIndex(k)
            self.eirp.setValue(r.sensor_eirp_dbm)
            if r.sensor.eirp_dbm is None:
                self.eirp.setToolTip("Sensor peak EIRP, dBm: the file gives conducted power + antenna gain - mismatch loss; "
                                     "a value entered here replaces them")
            _set_combo(self.sensor_pattern, r.sensor.pattern)
            _set_combo(self.sensor_axis, r.sensor.axis)
            self.return_loss.setValue(r.sensor.return_loss_db)
            _set_combo(self.wheel_model, r.wheel_model)
            self._show_wheel_model_in_use()
            self.rx_gain.setValue(r.receiver.gain_dbi)
            _set_combo(self.rx_pattern, r.receiver.pattern)
            _set_combo(self.rx_axis, tuple(float(a) for a in r.receiver.axis))
            self.sensitivity.setValue(r.receiver.sensitivity_dbm)
            self.required.setValue(r.required_margin_db)
            self.angles.setValue(r.angles_per_turn)
            self.frames.setValue(r.frames_per_burst)
            self.interval.setValue(r.frame_interval_s * 1000.0)
            self.frame_ms.setValue(0.0 if r.frame_duration_s is None else r.frame_duration_s * 1000.0)
            self.period.setValue(0.0 if r.burst_period_s is None else r.burst_period_s)
            _set_combo(self.market, r.market)
            check = check_sensor_eirp(r)
            self.limit_status.setText(check.short())
            self.limit_status.setToolTip(check.summary())
            self.limit_status.setStyleSheet("color: #b00000; font-weight: bold" if check.over_ceiling
                                            or check.duty_cycle_over else "color: #404040")
            self.speed_min.setValue(r.speed_min_mps * KMH_PER_MPS)
            self.speed_max.setValue(r.speed_max_mps * KMH_PER_MPS)
            self.ground.setChecked(r.ground_reflection)
            _set_combo(self.road, r.road_surface)
            self._fill_materials()
        finally:
            self._loading = False

    def _fill_materials(self) -> None:
        v = self.doc.vehicle
        names = list(BUILTIN_MATERIALS) + sorted(set(v.materials) - set(BUILTIN_MATERIALS))
        f = v.radio.frequency_hz
        # rebuilt only when what it shows changed (a spot drop changes the vehicle, not its materials)
        key = (f, tuple((n, v.materials[n].model_dump_json() if n in v.materials else None) for n in names))
        if key == self._materials_key:
            return
        self._materials_key = key
        self.materials.setRowCount(len(names))
        for row, name in enumerate(names):
            item = QTableWidgetItem(name)
            item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
            m = BUILTIN_MATERIALS.get(name)
            if m is not None:
                item.setToolTip(f"{m.description}\nsource: {m.source}")
                model = QTableWidgetItem(f"{float(material_loss_db(name, f)):.2f}")
            else:
                item.setToolTip(v.materials[name].description or "material defined in this file")
                model = QTableWidgetItem("-")
            model.setFlags(model.flags() & ~Qt.ItemFlag.ItemIsEditable)
            model.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            self.materials.setItem(row, 0, item)
            self.materials.setItem(row, 1, model)
            spin = _spin(-1.0, 100.0, 1, 0.5, "", f"Crossing loss of {name} in this file, dB; lowest value = use the model")
            spin.setSpecialValueText("model")
            spin.setValue(v.materials[name].loss_db if name in v.materials else -1.0)
            spin.valueChanged.connect(lambda _x, n=name, s=spin: self._override(n, s))
            self.materials.setCellWidget(row, 2, spin)
        self.materials.resizeColumnsToContents()
        self.materials.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        h = self.materials.horizontalHeader().height() + sum(self.materials.rowHeight(i) for i in range(len(names))) + 4
        self.materials.setFixedHeight(h)


def _set_combo(combo: QComboBox, data) -> None:
    for i in range(combo.count()):
        if combo.itemData(i) == data:
            combo.setCurrentIndex(i)
            return


class ZonesPanel(QWidget):
    """Panel zones (material per zone) and the mounting region's fixed coordinate."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self._loading = False
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        g = QGroupBox("Panel zones")
        v = QVBoxLayout(g)
        self.zones = QListWidget()
        self.zones.setToolTip("Select a zone to edit its outline in its view (drag, click an edge to add a corner)")
        v.addWidget(self.zones)
        f = QFormLayout()
        self.material = _compact(QComboBox())
        self.material.setToolTip("Material of the panels the zone covers")
        f.addRow("Material", self.material)
        v.addLayout(f)
        row = QHBoxLayout()
        self.add_top = QPushButton("Add in top view")
        self.add_side = QPushButton("Add in side view")
        self.delete = QPushButton("Delete")
        for b in (self.add_top, self.add_side, self.delete):
            row.addWidget(b)
        v.addLayout(row)
        lay.addWidget(g)
        g = QGroupBox("Mounting region (heatmap area)")
        f = QFormLayout(g)
        self.region = _compact(QComboBox())
        self.region.setToolTip("The region drawn dashed in its view; drag its corners to change the heatmap area")
        f.addRow("Region", self.region)
        self.fixed = _spin(-5000.0, 6000.0, 0, 10.0, " mm", "Height of a top-view region, or lateral position (y) of a side-view region, mm")
        self.fixed_label = QLabel("Height")
        f.addRow(self.fixed_label, self.fixed)
        row = QHBoxLayout()
        self.add_region_top = QPushButton("Add top-view region")
        self.add_region_top.setToolTip("A new mounting region in the top view, at floor height + 250 mm")
        self.add_region_side = QPushButton("Add side-view region")
        self.add_region_side.setToolTip("A new mounting region in the side view, on the centre line (y = 0 mm)")
        self.delete_region = QPushButton("Delete region")
        for b in (self.add_region_top, self.add_region_side, self.delete_region):
            row.addWidget(b)
        f.addRow(row)
        lay.addWidget(g)
        lay.addStretch(1)

        self.zones.currentRowChanged.connect(self._zone_selected)
        self.material.activated.connect(self._material_chosen)
        self.add_top.clicked.connect(lambda: self._add("top"))
        self.add_side.clicked.connect(lambda: self._add("side"))
        self.delete.clicked.connect(self._delete)
        self.region.activated.connect(lambda i: self.doc.select_region(i))
        self.add_region_top.clicked.connect(lambda: self._add_region("top"))
        self.add_region_side.clicked.connect(lambda: self._add_region("side"))
        self.delete_region.clicked.connect(self._delete_region)
        self.fixed.valueChanged.connect(self._fixed_changed)
        doc.vehicleChanged.connect(self.refresh)
        doc.regionSelectionChanged.connect(lambda _i: self.refresh())
        doc.zoneSelectionChanged.connect(lambda _i: self.refresh())
        self.refresh()

    def refresh(self) -> None:
        self._loading = True
        try:
            v = self.doc.vehicle
            self.zones.clear()
            for z in v.zones:
                self.zones.addItem(f"{z.name}  ({z.view} view, {z.material})")
            self.zones.setCurrentRow(self.doc.selected_zone)
            self.material.clear()
            for m in sorted(v.material_names()):
                self.material.addItem(m, m)
            if 0 <= self.doc.selected_zone < len(v.zones):
                _set_combo(self.material, v.zones[self.doc.selected_zone].material)
            self.material.setEnabled(self.doc.selected_zone >= 0)
            self.delete.setEnabled(self.doc.selected_zone >= 0)
            self.region.clear()
            for r in v.regions:
                self.region.addItem(f"{r.name} ({r.view} view)")
            if v.regions:
                r = v.regions[self.doc.region_index]
                self.region.setCurrentIndex(self.doc.region_index)
                self.fixed_label.setText("Height z" if r.view == "top" else "Lateral y")
                self.fixed.setValue(1000.0 * (r.height_m if r.view == "top" else r.lateral_m))
            self.fixed.setEnabled(bool(v.regions))
            self.delete_region.setEnabled(bool(v.regions))
        finally:
            self._loading = False

    def _zone_selected(self, row: int) -> None:
        if not self._loading:
            self.doc.select_zone(row)

    def _material_chosen(self, _i: int) -> None:
        i, m = self.doc.selected_zone, self.material.currentData()
        if i >= 0 and m:
            self.doc.apply(lambda v: edits.set_zone_material(v, i, m), f"Zone material {m}")

    def _add(self, view: str) -> None:
        n = len(self.doc.vehicle.zones)
        if self.doc.apply(lambda v: edits.add_zone(v, view, "glass"), f"Add zone in {view} view"):
            self.doc.select_zone(n)

    def _delete(self) -> None:
        i = self.doc.selected_zone
        if i >= 0:
            name = self.doc.vehicle.zones[i].name
            self.doc.select_zone(-1)
            self.doc.apply(lambda v: edits.delete_zone(v, i), f"Delete zone '{name}'")

    def _add_region(self, view: str) -> None:
        n = len(self.doc.vehicle.regions)
        if self.doc.apply(lambda v: edits.add_region(v, view), f"Add {view}-view region"):
            self.doc.select_region(n)

    def _delete_region(self) -> None:
        if not self.doc.vehicle.regions:
            return
        i = self.doc.region_index
        name = self.doc.vehicle.regions[i].name
        self.doc.select_region(0)
        self.doc.apply(lambda v: edits.delete_region(v, i), f"Delete region '{name}'")

    def _fixed_changed(self, mm: float) -> None:
        if self._loading or not self.doc.vehicle.regions:
            return
        i = self.doc.region_index
        self.doc.apply(lambda v: edits.set_region_fixed(v, i, mm / 1000.0), "Region position")
