"""File > Import body outline (DXF/SVG) and File > Trace body over a picture: the two dialogs.

Thin: the drawing is read, placed and simplified by core.body_import, the picture's scale and the
clicked outline by core.picture_trace; each dialog shows the result (size, points kept, largest
deviation, what was assumed) or the one-line reason it cannot be used, and hands back an
``Imported`` outline. The command applies it as ONE undoable edit (``Document.apply`` with
``core.body_import.apply_outlines``), where it is checked like a loaded file.
Display units: mm; stored: m.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QPixmap
from PySide6.QtWidgets import (
    QButtonGroup,
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFileDialog,
    QFormLayout,
    QGraphicsPixmapItem,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QPushButton,
    QRadioButton,
    QVBoxLayout,
    QWidget,
)

from app.gui.look import BODY_COLOUR
from core.body_import import UNITS_M, BodyImportError, Imported, Placement, Source, drawing_choices, import_outline
from core.bounds import MAX_BODY_OUTLINE_POINTS, MAX_OUTLINE_POINTS
from core.picture_trace import PictureScale, trace_outline

DRAWING_FILTER = "Drawings (*.dxf *.svg);;DXF (*.dxf);;SVG (*.svg);;All files (*)"
PICTURE_FILTER = "Pictures (*.png *.jpg *.jpeg *.bmp);;All files (*)"
WHOLE = "(whole drawing)"
FROM_FILE = "from the file"


def _spin(lo: float, hi: float, decimals: int = 1, suffix: str = "", value: float = 0.0) -> QDoubleSpinBox:
    s = QDoubleSpinBox()
    s.setRange(lo, hi)
    s.setDecimals(decimals)
    s.setSuffix(suffix)
    s.setValue(value)
    s.setKeyboardTracking(False)
    return s


def _pair_row(a: QWidget, b: QWidget) -> QHBoxLayout:
    row = QHBoxLayout()
    row.addWidget(a)
    row.addWidget(b)
    return row


def _message(label: QLabel, text: str, bad: bool) -> None:
    label.setText(text)
    label.setStyleSheet("color: #b00020;" if bad else "")


class _Placement(QWidget):
    """View, front, reference point and its vehicle position: the fields both dialogs share."""

    def __init__(self, ref_unit: str, parent: QWidget | None = None):
        super().__init__(parent)
        form = QFormLayout(self)
        form.setContentsMargins(0, 0, 0, 0)
        self.view = QComboBox()
        self.view.addItem("Side view (x, z)", "side")
        self.view.addItem("Top view (x, y), seen from above", "top")
        form.addRow("View", self.view)
        self.front = QComboBox()
        self.front.addItem("to the right", "right")
        self.front.addItem("to the left", "left")
        form.addRow("Vehicle front points", self.front)
        self.ref_u = _spin(-1e7, 1e7, 3, f" {ref_unit}")
        self.ref_v = _spin(-1e7, 1e7, 3, f" {ref_unit}")
        self.ref_row_label = QLabel("Reference point (u right, v up)")
        self.ref_row_label.setToolTip("A point of the drawing you know the vehicle position of, e.g. the front "
                                      "wheel's ground contact; in drawing units")
        form.addRow(self.ref_row_label, _pair_row(self.ref_u, self.ref_v))
        self.at_x = _spin(-50000, 50000, 1, " mm")
        self.at_y = _spin(-50000, 50000, 1, " mm")
        self.at_label = QLabel("...lies at vehicle")
        form.addRow(self.at_label, _pair_row(self.at_x, self.at_y))
        self.axes_note = QLabel()
        self.axes_note.setWordWrap(True)
        form.addRow(self.axes_note)
        self.view.currentIndexChanged.connect(self._label)
        self._label()

    def _label(self) -> None:
        second = "z" if self.view.currentData() == "side" else "y"
        up = "z up" if second == "z" else "y to the car's left"
        self.axes_note.setText(f"Vehicle axes: origin on the ground below the front axle's midpoint, x forward, {up}.")
        self.at_x.setPrefix("x ")
        self.at_y.setPrefix(f"{second} ")

    def placement(self, units: str | None = None, m_per_unit: float | None = None) -> Placement:
        return Placement(units=units, m_per_unit=m_per_unit, ref=(self.ref_u.value(), self.ref_v.value()),
                         ref_at=(self.at_x.value() / 1000.0, self.at_y.value() / 1000.0),
                         front=self.front.currentData())

    def changed_signals(self):
        return [self.view.currentIndexChanged, self.front.currentIndexChanged, self.ref_u.valueChanged,
                self.ref_v.valueChanged, self.at_x.valueChanged, self.at_y.valueChanged]


class ImportOutlineDialog(QDialog):
    """Choose a DXF/SVG drawing, its layer or element, units and reference point; preview the result."""

    def __init__(self, parent: QWidget | None = None, folder: str = "", materials=()):
        super().__init__(parent)
        self.setWindowTitle("Import body outline")
        self._folder = folder
        self.result_outline: Imported | None = None
        lay = QVBoxLayout(self)
        form = QFormLayout()
        self.file = QLineEdit()
        self.file.setPlaceholderText("a .dxf or .svg drawing")
        browse = QPushButton("Browse...")
        browse.clicked.connect(self._browse)
        form.addRow("Drawing", _pair_row(self.file, browse))
        self.select = QComboBox()
        form.addRow("Layer (DXF) or element id (SVG)", self.select)
        self.units = QComboBox()
        self.units.addItem(FROM_FILE, None)
        for name in UNITS_M:
            self.units.addItem(name, name)
        self.scale = _spin(0.0, 1e6, 4, " mm per unit")
        self.scale.setSpecialValueText("by the units")
        form.addRow("Drawing units", _pair_row(self.units, self.scale))
        self.target = QComboBox()
        self.target.addItem("the body outline", "body")
        self.target.addItem("a zone (replaces one of the same name and view)", "zone")
        form.addRow("Import as", self.target)
        self.zone_name = QLineEdit()
        self.zone_name.setPlaceholderText("zone name, e.g. rear glass")
        self.zone_material = QComboBox()
        for m in sorted(materials):
            self.zone_material.addItem(m, m)
        form.addRow("Zone name and material", _pair_row(self.zone_name, self.zone_material))
        lay.addLayout(form)
        self.where = _Placement("units")
        lay.addWidget(self.where)
        self.status = QLabel()
        self.status.setWordWrap(True)
        self.status.setMinimumHeight(60)
        lay.addWidget(self.status)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Apply (undoable)")
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        lay.addWidget(self.buttons)
        self.file.editingFinished.connect(self._file_changed)
        for sig in [self.select.currentIndexChanged, self.units.currentIndexChanged, self.scale.valueChanged,
                    self.target.currentIndexChanged, self.zone_name.textChanged, self.zone_material.currentIndexChanged,
                    *self.where.changed_signals()]:
            sig.connect(self.preview)
        self.preview()

    def _browse(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Drawing of the body", self._folder, DRAWING_FILTER)
        if path:
            self.set_file(path)

    def set_file(self, path: str) -> None:
        self.file.setText(path)
        self._file_changed()

    def _file_changed(self) -> None:
        self.select.blockSignals(True)
        self.select.clear()
        self.select.addItem(WHOLE, None)
        try:
            for name in drawing_choices(Path(self.file.text())) if self.file.text() else []:
                self.select.addItem(name, name)
        except BodyImportError:
            pass  # the preview says what is wrong with the file
        self.select.blockSignals(False)
        self.preview()

    def source(self) -> Source:
        scale = self.scale.value()
        return Source(Path(self.file.text()), self.select.currentData(),
                      self.where.placement(self.units.currentData(), scale / 1000.0 if scale > 0 else None))

    def zone(self) -> tuple[str, str] | None:
        """(name, material) when importing a zone, else None."""
        if self.target.currentData() != "zone":
            return None
        return self.zone_name.text().strip(), self.zone_material.currentData()

    def preview(self) -> None:
        ok = self.buttons.button(QDialogButtonBox.StandardButton.Ok)
        self.result_outline = None
        zone = self.zone()
        self.zone_name.setEnabled(zone is not None)
        self.zone_material.setEnabled(zone is not None)
        if zone is not None and not zone[0]:
            _message(self.status, "Name the zone.", False)
            ok.setEnabled(False)
            return
        if not self.file.text():
            _message(self.status, "Choose a DXF or SVG drawing.", False)
            ok.setEnabled(False)
            return
        try:
            budget = MAX_OUTLINE_POINTS if zone is not None else MAX_BODY_OUTLINE_POINTS
            self.result_outline = import_outline(self.source(), self.where.view.currentData(), budget)
        except BodyImportError as e:
            _message(self.status, str(e), True)
            ok.setEnabled(False)
            return
        r = self.result_outline
        _message(self.status, f"{r.summary()}.\n{'; '.join(r.notes)}.", False)
        ok.setEnabled(True)


class TraceDialog(QDialog):
    """Trace the body over a picture: two scale points and their distance, a reference point, the outline."""

    MODES = (("scale", "Scale points (2)"), ("ref", "Reference point"), ("outline", "Outline points"))

    def __init__(self, parent: QWidget | None = None, folder: str = ""):
        super().__init__(parent)
        self.setWindowTitle("Trace body outline over a picture")
        self._folder = folder
        self.picture_path = ""
        self.scale_px: list[tuple[float, float]] = []
        self.ref_px: tuple[float, float] | None = None
        self.outline_px: list[tuple[float, float]] = []
        self.result_outline: Imported | None = None
        lay = QHBoxLayout(self)
        self.plot = pg.PlotWidget()
        self.plot.setBackground("#e4e4e4")  # a white picture stands out from the view
        self.plot.getViewBox().invertY(True)
        self.plot.getViewBox().setAspectLocked(True)
        self.plot.setLabel("bottom", "picture x, px")
        self.plot.setLabel("left", "picture y, px")
        self.plot.setMinimumSize(560, 380)
        self._pixmap: QGraphicsPixmapItem | None = None
        pen = pg.mkPen(BODY_COLOUR, width=2)
        self._line = pg.PlotDataItem(pen=pen, symbol="o", symbolSize=6, symbolBrush=BODY_COLOUR)
        self._scale_item = pg.PlotDataItem(pen=pg.mkPen("#d0308a", width=2, style=Qt.PenStyle.DashLine),
                                           symbol="+", symbolSize=14, symbolPen=pg.mkPen("#d0308a", width=2))
        self._ref_item = pg.ScatterPlotItem(symbol="x", size=14, pen=pg.mkPen("#1f78b4", width=3))
        for it in (self._line, self._scale_item, self._ref_item):
            it.setZValue(10)
            self.plot.addItem(it)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        lay.addWidget(self.plot, 1)

        side = QVBoxLayout()
        load = QPushButton("Load picture...")
        load.clicked.connect(self._browse)
        side.addWidget(load)
        self.mode_group = QButtonGroup(self)
        side.addWidget(QLabel("Clicks set:"))
        for i, (key, label) in enumerate(self.MODES):
            b = QRadioButton(label)
            b.setProperty("mode", key)
            self.mode_group.addButton(b, i)
            side.addWidget(b)
        self.mode_group.button(0).setChecked(True)
        form = QFormLayout()
        self.distance = _spin(1.0, 30000.0, 1, " mm", 2700.0)
        form.addRow("Scale points apart", self.distance)
        self.level = QCheckBox("Level the picture on them")
        form.addRow("", self.level)
        side.addLayout(form)
        self.where = _Placement("px")
        self.where.ref_u.hide()
        self.where.ref_v.hide()
        self.where.ref_row_label.setText("Reference point: clicked")
        side.addWidget(self.where)
        row = QHBoxLayout()
        undo = QPushButton("Remove last point")
        undo.clicked.connect(self.remove_last)
        clear = QPushButton("Clear outline")
        clear.clicked.connect(self.clear_outline)
        row.addWidget(undo)
        row.addWidget(clear)
        side.addLayout(row)
        note = QLabel("Perspective is not corrected: use a drawing, or a photo taken square to the vehicle "
                      "from far away.")
        note.setWordWrap(True)
        side.addWidget(note)
        self.status = QLabel()
        self.status.setWordWrap(True)
        self.status.setMinimumHeight(80)
        side.addWidget(self.status)
        side.addStretch(1)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        self.buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Apply (undoable)")
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        side.addWidget(self.buttons)
        panel = QWidget()
        panel.setLayout(side)
        panel.setMaximumWidth(420)
        lay.addWidget(panel)
        for sig in [self.distance.valueChanged, self.level.toggled, *self.where.changed_signals()]:
            sig.connect(self.preview)
        self.preview()

    # ----- picture and clicks ----------------------------------------------------------------------
    def _browse(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Side or top view of the body", self._folder, PICTURE_FILTER)
        if path:
            self.load_picture(path)

    def load_picture(self, path: str) -> bool:
        pix = QPixmap(path)
        if pix.isNull():
            _message(self.status, f"{Path(path).name}: not a picture this program can read", True)
            return False
        if self._pixmap is not None:
            self.plot.removeItem(self._pixmap)
        self._pixmap = QGraphicsPixmapItem(pix)
        self._pixmap.setZValue(-10)
        self.plot.addItem(self._pixmap)
        self.picture_path = path
        self.plot.getViewBox().autoRange(padding=0.02)
        self.preview()
        return True

    def mode(self) -> str:
        return self.mode_group.checkedButton().property("mode")

    def set_mode(self, key: str) -> None:
        for b in self.mode_group.buttons():
            if b.property("mode") == key:
                b.setChecked(True)

    def _clicked(self, ev) -> None:
        if self._pixmap is None or ev.button() != Qt.MouseButton.LeftButton:
            return
        p = self.plot.getViewBox().mapSceneToView(ev.scenePos())
        self.add_point(self.mode(), (p.x(), p.y()))

    def add_point(self, mode: str, px: tuple[float, float]) -> None:
        """A click in picture pixels: a scale point (the third starts a new pair), the reference, or an outline point."""
        px = (float(px[0]), float(px[1]))
        if mode == "scale":
            self.scale_px = (self.scale_px if len(self.scale_px) < 2 else [])
            self.scale_px.append(px)
        elif mode == "ref":
            self.ref_px = px
        else:
            self.outline_px.append(px)
        self.preview()

    def remove_last(self) -> None:
        if self.outline_px:
            self.outline_px.pop()
        self.preview()

    def clear_outline(self) -> None:
        self.outline_px = []
        self.preview()

    # ----- result ----------------------------------------------------------------------------------
    def _redraw(self) -> None:
        pts = np.array(self.outline_px + self.outline_px[:1]) if self.outline_px else np.zeros((0, 2))
        self._line.setData(pts[:, 0], pts[:, 1]) if len(pts) else self._line.setData([], [])
        sp = np.array(self.scale_px) if self.scale_px else np.zeros((0, 2))
        self._scale_item.setData(sp[:, 0], sp[:, 1]) if len(sp) else self._scale_item.setData([], [])
        self._ref_item.setData([self.ref_px[0]] if self.ref_px else [], [self.ref_px[1]] if self.ref_px else [])

    def preview(self) -> None:
        self._redraw()
        ok = self.buttons.button(QDialogButtonBox.StandardButton.Ok)
        ok.setEnabled(False)
        self.result_outline = None
        need = []
        if self._pixmap is None:
            need.append("load a picture")
        if len(self.scale_px) < 2:
            need.append(f"click the {'second' if self.scale_px else 'two'} scale point{'' if self.scale_px else 's'}")
        if self.ref_px is None:
            need.append("click the reference point")
        if len(self.outline_px) < 3:
            need.append(f"click the outline ({len(self.outline_px)} of at least 3 points)")
        if need:
            _message(self.status, "To do: " + "; ".join(need) + ".", False)
            return
        try:
            scale = PictureScale(self.scale_px[0], self.scale_px[1], self.distance.value() / 1000.0,
                                 self.level.isChecked())
            p = self.where.placement()
            self.result_outline = trace_outline(self.outline_px, scale, self.where.view.currentData(), self.ref_px,
                                                p.ref_at, p.front, source=Path(self.picture_path).name)
        except BodyImportError as e:
            _message(self.status, str(e), True)
            return
        r = self.result_outline
        _message(self.status, f"{r.summary()}.\n{'; '.join(r.notes)}.", False)
        ok.setEnabled(True)
