"""Dialogs: bad file, save error, unsaved changes, spot name and antenna axis, wheel choice, recovery
offer, about box, help."""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QHBoxLayout,
    QInputDialog,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QMessageBox,
    QTextBrowser,
    QVBoxLayout,
    QWidget,
)

from core.vehicle import VehicleFileError

CAUTION = (
    "The tire-pressure warning is a safety function that the law requires in many markets. "
    "Wheelreach is an early placement aid built on simplified propagation models: its margins, heatmaps and "
    "rankings are approximate. Confirm any receiver location by detailed electromagnetic simulation and by "
    "measurements on the vehicle before relying on it. Transmit power, duty cycle and band limits follow the "
    "radio rules of each market and licensed engineering practice; the EIRP presets here are a convenience, "
    "not a statement of compliance."
)

AXIS_CHOICES = (
    ("receiver default (radio settings)", None),
    ("x, forward", (1.0, 0.0, 0.0)),
    ("y, left", (0.0, 1.0, 0.0)),
    ("z, up", (0.0, 0.0, 1.0)),
    ("custom direction", "custom"),
)


def file_error_text(err: VehicleFileError) -> str:
    """The located message of a bad file: field and problem on their own lines."""
    lines = []
    if err.path:
        lines.append(f"File: {err.path}")
    if err.field:
        lines.append(f"Field: {err.field}")
    lines.append(f"Problem: {err.problem}")
    lines.append("")
    lines.append("Nothing was loaded; the current document is unchanged.")
    return "\n".join(lines)


def show_file_error(parent: QWidget | None, err: VehicleFileError) -> None:
    QMessageBox.critical(parent, "Cannot open the vehicle file", file_error_text(err))


def save_error_text(target, err: Exception) -> str:
    """The message of a failed save: the file the user chose (never the temporary file beside it)
    and the problem, without the temporary file's name."""
    if isinstance(err, VehicleFileError):
        problem = str(err)
    elif isinstance(err, OSError) and err.strerror:
        problem = err.strerror
    else:
        problem = str(err)
    return (f"File: {target}\nProblem: {problem}\n\n"
            "Nothing was written: the file on disk (if there is one) is unchanged and your edits are still open.")


def show_save_error(parent: QWidget | None, target, err: Exception) -> None:
    QMessageBox.critical(parent, "Cannot save the vehicle file", save_error_text(target, err))


def ask_unsaved(parent: QWidget | None, name: str) -> str:
    """'save', 'discard' or 'cancel'."""
    B = QMessageBox.StandardButton
    r = QMessageBox.question(parent, "Unsaved changes", f"{name} has changes that are not saved. Save them first?",
                             B.Save | B.Discard | B.Cancel, B.Save)
    return {B.Save: "save", B.Discard: "discard"}.get(r, "cancel")


class RecoveryDialog(QDialog):
    """Unsaved work of windows that did not close normally: open, discard or keep each copy."""

    def __init__(self, parent: QWidget | None, orphans):
        super().__init__(parent)
        self.setWindowTitle("Recover unsaved work")
        self.choice = "later"
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("Wheelreach windows closed without saving left these recovery copies.\n"
                             "Tick the copies to open or to discard; the others are offered again next time."))
        self.list = QListWidget()
        for o in orphans:
            text = f"{o.title}: unsaved work of {o.saved_at}\n    {o.original_path or 'never saved to a file'}"
            if o.problem:
                text += f"\n    cannot be opened: {o.problem}"
            item = QListWidgetItem(text)
            item.setToolTip(f"recovery copy {o.path}")
            item.setFlags(item.flags() | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Unchecked if o.problem else Qt.CheckState.Checked)
            self.list.addItem(item)
        self.list.setMinimumWidth(720)
        self.list.setWordWrap(True)
        lay.addWidget(self.list)
        bb = QDialogButtonBox()
        self.open_button = bb.addButton("Open ticked", QDialogButtonBox.ButtonRole.AcceptRole)
        self.discard_button = bb.addButton("Discard ticked", QDialogButtonBox.ButtonRole.DestructiveRole)
        self.later_button = bb.addButton("Decide later", QDialogButtonBox.ButtonRole.RejectRole)
        self.open_button.setDefault(True)
        self.open_button.clicked.connect(lambda: self._finish("open"))
        self.discard_button.clicked.connect(lambda: self._finish("discard"))
        self.later_button.clicked.connect(lambda: self._finish("later"))
        lay.addWidget(bb)

    def _finish(self, choice: str) -> None:
        self.choice = choice
        self.accept() if choice != "later" else self.reject()

    def ticked(self) -> list[int]:
        return [i for i in range(self.list.count()) if self.list.item(i).checkState() == Qt.CheckState.Checked]


def ask_recover(parent: QWidget | None, orphans) -> tuple[str, list[int]]:
    """('open' | 'discard' | 'later', indices of the ticked copies)."""
    dlg = RecoveryDialog(parent, orphans)
    dlg.exec()
    return dlg.choice, dlg.ticked()


def ask_spot_name(parent: QWidget | None, title: str, current: str) -> str | None:
    text, ok = QInputDialog.getText(parent, title, "Spot name:", text=current)
    text = text.strip()
    return text if ok and text else None


def ask_wheel(parent: QWidget | None, title: str, wheel_ids) -> str | None:
    """Choose one wheel by its id (None when cancelled)."""
    text, ok = QInputDialog.getItem(parent, title, "Wheel:", list(wheel_ids), 0, False)
    return text if ok and text else None


def refuse(parent: QWidget | None, title: str, text: str) -> None:
    QMessageBox.information(parent, title, text)


class AxisDialog(QDialog):
    """Choose a spot's receiver antenna axis in vehicle axes."""

    def __init__(self, parent: QWidget | None, spot_name: str, axis):
        super().__init__(parent)
        self.setWindowTitle(f"Antenna axis of '{spot_name}'")
        lay = QVBoxLayout(self)
        form = QFormLayout()
        self.choice = QComboBox()
        for label, data in AXIS_CHOICES:
            self.choice.addItem(label, data)
        form.addRow("Axis", self.choice)
        row = QHBoxLayout()
        self.comp = []
        for name in "xyz":
            s = QDoubleSpinBox()
            s.setRange(-1.0, 1.0)
            s.setDecimals(3)
            s.setSingleStep(0.1)
            s.setPrefix(f"{name} ")
            row.addWidget(s)
            self.comp.append(s)
        form.addRow("Direction", row)
        lay.addLayout(form)
        bb = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        bb.accepted.connect(self.accept)
        bb.rejected.connect(self.reject)
        lay.addWidget(bb)
        idx = 0
        if axis is not None:
            idx = next((i for i, (_l, d) in enumerate(AXIS_CHOICES) if d == tuple(axis)), len(AXIS_CHOICES) - 1)
            for s, a in zip(self.comp, axis):
                s.setValue(a)
        self.choice.setCurrentIndex(idx)
        self.choice.currentIndexChanged.connect(self._sync)
        self._sync()

    def _sync(self) -> None:
        data = self.choice.currentData()
        for s in self.comp:
            s.setEnabled(data == "custom")
        if isinstance(data, tuple):
            for s, a in zip(self.comp, data):
                s.setValue(a)

    def axis(self):
        data = self.choice.currentData()
        if data == "custom":
            return tuple(s.value() for s in self.comp)
        return data


def about(parent: QWidget | None) -> None:
    QMessageBox.about(
        parent, "About Wheelreach",
        "<b>Wheelreach</b>: placement aid for the receiver of a direct tire-pressure monitoring system.<br><br>"
        "It computes the worst-case link margin of every wheel's sensor over a full wheel turn for candidate "
        "receiver spots, from free-space loss (Friis, ITU-R P.525), knife-edge diffraction (ITU-R P.526), "
        "panel crossing losses, antenna patterns and polarization, and the road's reflection.<br><br>"
        f"<b>Caution.</b> {CAUTION}",
    )


def readme_path() -> Path:
    return Path(__file__).resolve().parents[2] / "README.md"


def show_help(parent: QWidget | None, section: str | None = None) -> QDialog:
    """Show README.md (sections: Set up, Usage, Caution) in a browser window."""
    dlg = QDialog(parent)
    dlg.setWindowTitle("Using Wheelreach")
    dlg.resize(760, 620)
    lay = QVBoxLayout(dlg)
    browser = QTextBrowser()
    path = readme_path()
    try:
        text = path.read_text(encoding="utf-8")
    except OSError:
        text = f"README.md was not found next to the program ({path})."
    browser.setMarkdown(text)
    if section:
        browser.find(section)
    lay.addWidget(browser)
    bb = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
    bb.rejected.connect(dlg.reject)
    lay.addWidget(bb)
    dlg.show()
    return dlg
