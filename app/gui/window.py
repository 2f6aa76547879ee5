"""The main window: body views side by side, the ranking panel below, settings at the right.

Menus and shortcuts come from ``app.gui.commands.COMMANDS``. Files: recent list in QSettings, samples
submenu, a clear dialog for a bad file (the document is left untouched), a prompt before closing
with unsaved changes, and a recovery copy written every two minutes while there are unsaved
changes, offered on the next start when the program did not close normally.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

from PySide6.QtCore import QSettings, QStandardPaths, Qt, QTimer
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QLabel,
    QMainWindow,
    QScrollArea,
    QSplitter,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from app.gui import commands, dialogs
from app.gui.body_views import BodyView
from app.gui.defence_panel import install_defence_panel
from app.gui.document import Document
from app.gui.ranking_panel import RankingPanel
from app.gui.settings_panel import RadioPanel, ZonesPanel
from core.regulatory import check_sensor_eirp
from core.vehicle import VehicleFileError, atomic_write_text, vehicle_from_dict, vehicle_to_dict

AUTOSAVE_MS = 120_000
MAX_RECENT = 8


def recovery_file() -> Path:
    base = Path(QStandardPaths.writableLocation(QStandardPaths.StandardLocation.AppDataLocation) or ".")
    return base / "recovery" / "recovery.json"


class SpotReadout(QLabel):
    """One line about the selected spot: position in mm, margin and worst wheel (live while dragging)."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self.margin_db: float | None = None
        self.setTextFormat(Qt.TextFormat.RichText)
        self.setToolTip("Selected receiver spot; while a spot is dragged the margin follows the mouse")
        doc.scoresReady.connect(self.refresh)
        doc.selectionChanged.connect(lambda _n: self.refresh())
        doc.liveScore.connect(self._live)
        self.refresh()

    def refresh(self) -> None:
        name = self.doc.selected
        sc = self.doc.scores
        if not name or name not in sc.names:
            self.margin_db = None
            self.setText("No spot selected: click a spot in a view or in the table.")
            return
        self._show(name, sc, sc.names.index(name), moving=False)

    def _live(self, name: str, sc) -> None:
        if name == self.doc.selected:
            self._show(name, sc, 0, moving=True)

    def _show(self, name: str, sc, i: int, moving: bool) -> None:
        x, y, z = (1000.0 * c for c in sc.positions[i])
        w = int(sc.worst_wheel[i])
        self.margin_db = float(sc.margin_db[i])
        colour = "#0a6b2a" if self.margin_db >= 0 else "#a3141e"
        state = " (moving)" if moving else ""
        near = "  near field: indicative only" if sc.near_field is not None and sc.near_field[i] else ""
        from core.placement import INSIDE, classify

        pl = classify(self.doc.scene, sc.positions[i : i + 1])  # one point, well under a millisecond
        if pl.status[0] != INSIDE:
            near += f" &nbsp; <b style='color:#a3141e'>{pl.flag(0)}</b>"  # the warning: marker and table tooltips
        self.setText(
            f"<b>{name}</b>{state} &nbsp; x {x:.0f} mm, y {y:.0f} mm, z {z:.0f} mm &nbsp;&nbsp; "
            f"worst-case margin <b style='color:{colour}'>{self.margin_db:+.2f} dB</b> &nbsp; "
            f"worst wheel {sc.wheel_ids[w]} at {sc.worst_angle_deg[i, w]:.0f} deg{near}"
        )


class MainWindow(QMainWindow):
    def __init__(self, doc: Document, settings: QSettings | None = None, autosave: bool = True):
        super().__init__()
        self.doc = doc
        doc.setParent(self)  # the document lives as long as its window
        self.settings = settings or QSettings("Wheelreach", "Wheelreach")
        self.help_dialog = None
        self.actions: dict[str, QAction] = {}

        self.top = BodyView(doc, "top")
        self.side = BodyView(doc, "side")
        self.side.plot.setXLink(self.top.plot)
        self.readout = SpotReadout(doc)
        views = QSplitter(Qt.Orientation.Horizontal)
        views.addWidget(self.top)
        views.addWidget(self.side)
        upper = QWidget()
        ul = QVBoxLayout(upper)
        ul.setContentsMargins(4, 2, 4, 0)
        ul.setSpacing(2)
        ul.addWidget(self.readout)
        ul.addWidget(views, 1)
        self.ranking = RankingPanel(doc)
        main = QSplitter(Qt.Orientation.Vertical)
        main.addWidget(upper)
        main.addWidget(self.ranking)
        main.setStretchFactor(0, 4)
        main.setStretchFactor(1, 6)
        main.setSizes([380, 560])
        self.setCentralWidget(main)

        self.radio_panel = RadioPanel(doc)
        self.zones_panel = ZonesPanel(doc)
        tabs = QTabWidget()
        for w, title in ((self.radio_panel, "Radio and materials"), (self.zones_panel, "Zones and regions")):
            sa = QScrollArea()
            sa.setWidget(w)
            sa.setWidgetResizable(True)
            sa.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
            tabs.addTab(sa, title)
        dock = QDockWidget("Settings")
        dock.setObjectName("settings")
        dock.setWidget(tabs)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
        dock.setMinimumWidth(390)
        self.dock = dock

        self.model_label = QLabel()
        self.statusBar().addPermanentWidget(self.model_label)
        self._build_menus()

        doc.statusMessage.connect(lambda t: self.statusBar().showMessage(t, 10000))
        doc.pathChanged.connect(self._update_title)
        doc.cleanChanged.connect(lambda _c: self._update_title())
        doc.vehicleChanged.connect(self._update_title)
        doc.vehicleChanged.connect(self._update_model_label)
        doc.selectionChanged.connect(lambda _n: self._update_enabled())
        doc.undo_stack.canUndoChanged.connect(lambda _b: self._update_enabled())
        doc.undo_stack.canRedoChanged.connect(lambda _b: self._update_enabled())
        self._update_title()
        self._update_model_label()
        self._update_enabled()

        self.autosave_timer = QTimer(self)
        self.autosave_timer.setInterval(AUTOSAVE_MS)
        self.autosave_timer.timeout.connect(self.write_recovery)
        if autosave:
            self.autosave_timer.start()
        install_defence_panel(self)  # the selected spot's link budget, tornado and P(pass) (app/gui/defence_panel.py)
        self.resize(1600, 1000)

    # ----- menus -----------------------------------------------------------------------
    def _build_menus(self) -> None:
        menus = {}
        for cmd in commands.COMMANDS:
            if cmd.menu not in menus:
                menus[cmd.menu] = self.menuBar().addMenu(cmd.menu)
            menu = menus[cmd.menu]
            act = QAction(cmd.label, self)
            if cmd.shortcut:
                act.setShortcut(QKeySequence(cmd.shortcut))
            act.setStatusTip(cmd.tip)
            act.setToolTip(cmd.tip)
            act.setCheckable(cmd.checkable)
            act.triggered.connect(lambda _checked=False, c=cmd: c.func(self.doc, self))
            menu.addAction(act)
            self.actions[cmd.func.__name__] = act
            if cmd.func is commands.open_file:
                self.samples_menu = menu.addMenu("Open sa&mple")
                self.recent_menu = menu.addMenu("Open &recent")
                self._fill_samples()
                self._fill_recent()
            if cmd.func is commands.save_file_as:
                menu.addSeparator()
        self.addActions(list(self.actions.values()))

    def _fill_samples(self) -> None:
        from core.samples import SAMPLES_DIR

        self.samples_menu.clear()
        for p in sorted(SAMPLES_DIR.glob("*.json")):
            act = self.samples_menu.addAction(p.stem.replace("_", " "))
            act.triggered.connect(lambda _c=False, p=p: self.open_path(p))

    def recent_files(self) -> list[str]:
        val = self.settings.value("recent_files", [])
        if isinstance(val, str):
            val = [val]
        return [str(v) for v in (val or [])]

    def _add_recent(self, path) -> None:
        p = str(Path(path).resolve())
        items = [p] + [r for r in self.recent_files() if r != p]
        self.settings.setValue("recent_files", items[:MAX_RECENT])
        self.settings.setValue("last_folder", str(Path(p).parent))
        self._fill_recent()

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        items = self.recent_files()
        for p in items:
            act = self.recent_menu.addAction(p)
            act.triggered.connect(lambda _c=False, p=p: self.open_path(p))
        self.recent_menu.setEnabled(bool(items))

    def last_folder(self) -> str:
        return str(self.settings.value("last_folder", str(Path.home())))

    def _update_enabled(self) -> None:
        try:
            stack = self.doc.undo_stack
            stack.canUndo()
        except RuntimeError:  # the document is being destroyed with its window
            return
        has_spot = bool(self.doc.selected)
        for cmd in commands.COMMANDS:
            act = self.actions[cmd.func.__name__]
            if cmd.enabled_when == "spot":
                act.setEnabled(has_spot)
            elif cmd.enabled_when == "undo":
                act.setEnabled(stack.canUndo())
                act.setText("&Undo " + stack.undoText() if stack.canUndo() else "&Undo")
            elif cmd.enabled_when == "redo":
                act.setEnabled(stack.canRedo())
                act.setText("&Redo " + stack.redoText() if stack.canRedo() else "&Redo")

    def _update_title(self) -> None:
        try:
            modified = self.doc.modified
        except RuntimeError:  # the document is being destroyed with its window
            return
        v = self.doc.vehicle
        self.setWindowTitle(f"{self.doc.display_name()}[*] - {v.name} - Wheelreach")
        self.setWindowModified(modified)
        self._update_enabled()

    def _update_model_label(self) -> None:
        s = self.doc.scene
        check = check_sensor_eirp(self.doc.vehicle.radio)
        first = (f"RADIO LIMIT EXCEEDED by {check.excess_db:.1f} dB (margins at the ceiling {check.excess_db:.1f} dB "
                 "lower)  |  " if check.over_ceiling else "")
        self.model_label.setStyleSheet("color: #b00000; font-weight: bold" if check.over_ceiling else "")
        self.model_label.setToolTip(check.summary())
        self.model_label.setText(
            f"{first}{s.freq_hz / 1e6:.2f} MHz  |  sensor EIRP {s.eirp_dbm:.1f} dBm  |  sensitivity {s.sensitivity_dbm:.0f} dBm  |  "
            f"wheel model: {s.wheel_model_label}  |  road reflection {'on' if s.ground_reflection else 'off'}"
        )

    def fit_views(self) -> None:
        self.top.plot.autoRange(padding=0.06)
        self.side.plot.autoRange(padding=0.06)
        self.ranking.heatmap.plot.autoRange(padding=0.04)

    # ----- files -----------------------------------------------------------------------
    def confirm_discard(self) -> bool:
        """True when the current document may be replaced (saved, discarded or unchanged)."""
        if not self.doc.modified:
            return True
        answer = dialogs.ask_unsaved(self, self.doc.display_name())
        if answer == "save":
            return bool(commands.save_file(self.doc, self))
        return answer == "discard"

    def open_path(self, path, confirm: bool = True) -> bool:
        """Open a vehicle file; a bad file shows its located message and leaves the document untouched."""
        if confirm and not self.confirm_discard():
            return False
        try:
            v = Document.read(path)
        except VehicleFileError as e:
            dialogs.show_file_error(self, e)
            return False
        self.ranking.heatmap.cancel(wait=True)
        self.doc.replace(v, path)
        self._add_recent(path)
        self.fit_views()
        self.statusBar().showMessage(f"Opened {path}", 8000)
        return True

    def save_to(self, path) -> bool:
        try:
            self.doc.save(path)
        except (OSError, VehicleFileError) as e:
            dialogs.show_save_error(self, str(e))
            return False
        self._add_recent(path)
        self.remove_recovery()
        self.statusBar().showMessage(f"Saved {path}", 8000)
        return True

    # ----- recovery --------------------------------------------------------------------
    def write_recovery(self) -> Path | None:
        """Write a recovery copy of unsaved work (atomic); nothing when there are no unsaved changes."""
        if not self.doc.modified:
            return None
        f = recovery_file()
        f.parent.mkdir(parents=True, exist_ok=True)
        payload = {"original_path": str(self.doc.path or ""), "saved_at": time.strftime("%Y-%m-%d %H:%M:%S"),
                   "vehicle": vehicle_to_dict(self.doc.vehicle)}
        atomic_write_text(f, json.dumps(payload, indent=1))
        return f

    def remove_recovery(self) -> None:
        try:
            recovery_file().unlink()
        except FileNotFoundError:
            pass

    def offer_recovery(self) -> bool:
        """On start: offer a recovery copy left by a session that did not close normally."""
        f = recovery_file()
        if not f.exists():
            return False
        try:
            payload = json.loads(f.read_text(encoding="utf-8"))
            v = vehicle_from_dict(payload["vehicle"])
        except (OSError, ValueError, KeyError, TypeError, VehicleFileError):
            self.remove_recovery()
            return False
        original = payload.get("original_path") or ""
        if not dialogs.ask_recover(self, payload.get("saved_at", "?"), original):
            self.remove_recovery()
            return False
        self.doc.replace(v, original or None)
        self.doc.undo_stack.resetClean()  # the recovered work is not saved
        self._update_title()
        self.statusBar().showMessage("Recovered unsaved work; save it to keep it.", 10000)
        return True

    def closeEvent(self, ev: QCloseEvent) -> None:
        if not self.confirm_discard():
            ev.ignore()
            return
        self.ranking.heatmap.cancel(wait=True)
        self.autosave_timer.stop()
        self.remove_recovery()
        ev.accept()

