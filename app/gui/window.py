"""The main window: body views side by side, the ranking panel below, settings at the right.

Menus and shortcuts come from ``app.gui.commands.COMMANDS``. Files: recent list in QSettings, samples
submenu, a clear dialog for a bad file (the document is left untouched), a prompt before closing
with unsaved changes. Each window keeps its own recovery copy of unsaved work (``app.gui.recovery``),
written two seconds after the last edit; copies left by windows that did not close normally are
offered at the next start. Long work runs in worker threads (``app.gui.tasks``): opening a file or
closing the window while a heatmap or the scoring runs is immediate.
"""

from __future__ import annotations

import time
from pathlib import Path

from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QCloseEvent, QKeySequence
from PySide6.QtWidgets import (
    QDockWidget,
    QLabel,
    QMainWindow,
    QProgressBar,
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
from app.gui.look import ElidedLabel, signed
from app.gui.properties_panel import PropertiesPanel, spot_axis_note
from app.gui.ranking_panel import RankingPanel
from app.gui.recovery import DEBOUNCE_MS, RecoveryCopy, find_orphans, recovery_dir
from app.gui.settings_panel import RadioPanel, ZonesPanel
from core.regulatory import check_sensor_eirp
from core.vehicle import Vehicle, VehicleFileError

MAX_RECENT = 8
#: a recovery copy is written at the latest this long after the first unsaved edit, even while edits go on, s
RECOVERY_MAX_DELAY_S = 10.0
#: windows opened by the program itself (recovered copies), kept alive until they close
_EXTRA_WINDOWS: list = []


class SpotReadout(QLabel):
    """One line about the selected spot: position in mm, margin and worst wheel (live while dragging)."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self.margin_db: float | None = None
        self.setTextFormat(Qt.TextFormat.RichText)
        self.setWordWrap(True)  # a long line wraps instead of setting the window's minimum width
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
        i = sc.names.index(name)
        if self.doc.pending[i]:
            self.margin_db = None
            x, y, z = (1000.0 * c for c in sc.positions[i])
            self.setText(f"<b>{name}</b> &nbsp; x {x:.0f} mm, y {y:.0f} mm, z {z:.0f} mm &nbsp;&nbsp; "
                         "worst-case margin: being computed (see the progress in the status bar)")
            return
        self._show(name, sc, i, moving=False)

    def _live(self, name: str, sc) -> None:
        if name == self.doc.selected:
            self._show(name, sc, 0, moving=True)

    def _show(self, name: str, sc, i: int, moving: bool) -> None:
        x, y, z = (1000.0 * c for c in sc.positions[i])
        w = int(sc.worst_wheel[i])
        self.margin_db = float(sc.margin_db[i])
        shown = signed(self.margin_db, 2)
        colour = "#0a6b2a" if float(shown) >= 0 else "#a3141e"  # by the value shown: never a red "-0.00"
        state = " (moving)" if moving else ""
        near = "  near field: indicative only" if sc.near_field is not None and sc.near_field[i] else ""
        from core.placement import INSIDE

        pl, k = (self.doc.live_placement, 0) if moving else (self.doc.placement(), i)
        if pl.status[k] != INSIDE:
            near += f" &nbsp; <b style='color:#a3141e'>{pl.flag(k)}</b>"  # the warning: marker and table tooltips
        own = spot_axis_note(self.doc.vehicle, name)  # the spot's own axis overrides the Receiver antenna setting
        if own:
            near += f" &nbsp; axis: {own}"
        self.setText(
            f"<b>{name}</b>{state} &nbsp; x {x:.0f} mm, y {y:.0f} mm, z {z:.0f} mm &nbsp;&nbsp; "
            f"worst-case margin <b style='color:{colour}'>{shown} dB</b> &nbsp; "
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
        self.properties_panel = PropertiesPanel(doc)
        tabs = QTabWidget()
        for w, title in ((self.radio_panel, "Radio and materials"), (self.zones_panel, "Zones and regions"),
                         (self.properties_panel, "Properties")):
            sa = QScrollArea()
            sa.setWidget(w)
            sa.setWidgetResizable(True)
            sa.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
            tabs.addTab(sa, title)
        self.settings_tabs = tabs
        dock = QDockWidget("Settings")
        dock.setObjectName("settings")
        dock.setWidget(tabs)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
        self.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
        dock.setMinimumWidth(390)
        self.dock = dock

        self.model_label = ElidedLabel()  # the setup line; shortened, never widening the window
        self.work_bar = QProgressBar()
        self.work_bar.setMaximumWidth(220)
        self.work_bar.setFormat("scoring spots %p %")
        self.work_bar.setToolTip("The file's receiver spots are being scored in the background")
        self.work_bar.hide()
        self.statusBar().addPermanentWidget(self.work_bar)
        self.statusBar().addPermanentWidget(self.model_label)
        # a temporary message (an edit refused, a file written) gets the whole bar while it shows; the setup
        # line returns when it ends (it ran into the setup line and read as one sentence)
        self.statusBar().messageChanged.connect(lambda text: self.model_label.setVisible(not text))
        self._build_menus()

        doc.statusMessage.connect(lambda t: self.statusBar().showMessage(t, 10000))
        doc.pathChanged.connect(self._update_title)
        doc.cleanChanged.connect(lambda _c: self._update_title())
        doc.vehicleChanged.connect(self._update_title)
        doc.vehicleChanged.connect(self._update_model_label)
        doc.selectionChanged.connect(lambda _n: self._update_enabled())
        doc.undo_stack.canUndoChanged.connect(lambda _b: self._update_enabled())
        doc.undo_stack.canRedoChanged.connect(lambda _b: self._update_enabled())
        doc.scoringProgress.connect(self._scoring_progress)
        self._update_title()
        self._update_model_label()
        self._update_enabled()

        # recovery copy of unsaved work, per window (None: off, e.g. for a screenshot)
        self.recovery: RecoveryCopy | None = RecoveryCopy(recovery_dir(self.settings)) if autosave else None
        self._unsaved_since: float | None = None
        self.recovery_timer = QTimer(self)
        self.recovery_timer.setSingleShot(True)
        self.recovery_timer.setInterval(DEBOUNCE_MS)
        self.recovery_timer.timeout.connect(self.write_recovery)
        doc.undo_stack.indexChanged.connect(self._edited)
        doc.cleanChanged.connect(self._edited)
        install_defence_panel(self)  # the selected spot's link budget, tornado and P(pass) (app/gui/defence_panel.py)
        self.resize(1600, 1000)
        self._watch_kernel_warm_up()

    def _watch_kernel_warm_up(self) -> None:
        """While core.kernels compiles in the background (first start of an installed copy), say so in the
        status bar (a permanent note, so other messages do not hide it; the numpy path computes meanwhile);
        when it is ready, remove the note and say so once."""
        from PySide6.QtWidgets import QLabel

        from core import kernels

        if not kernels.warming():
            return
        self.kernel_note = QLabel("preparing the compiled link kernel (first start only)...")
        self.kernel_note.setToolTip("The link kernel is compiled once for this installation, in the background; "
                                    "until it is ready the numpy path computes the same results, more slowly.")
        self.statusBar().insertPermanentWidget(0, self.kernel_note)
        self.kernel_timer = QTimer(self)
        self.kernel_timer.setInterval(250)

        def poll():
            if kernels.warming():
                return
            self.kernel_timer.stop()
            self.statusBar().removeWidget(self.kernel_note)
            self.kernel_note.deleteLater()
            self.statusBar().showMessage(f"Link computations: {kernels.status()}", 8000)

        self.kernel_timer.timeout.connect(poll)
        self.kernel_timer.start()

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
        self.model_label.set_full_text(
            f"{first}{s.freq_hz / 1e6:.2f} MHz  |  sensor EIRP {s.eirp_dbm:.1f} dBm  |  sensitivity {s.sensitivity_dbm:.0f} dBm  |  "
            f"wheel model: {s.wheel_model_label}  |  road reflection {'on' if s.ground_reflection else 'off'}",
            check.summary())

    def _scoring_progress(self, done: int, total: int) -> None:
        if total <= 0:
            self.work_bar.hide()
            return
        self.work_bar.setRange(0, total)
        self.work_bar.setValue(done)
        self.work_bar.show()

    def show_properties(self) -> None:
        """Bring the Properties tab forward, the selected spot's x box focused."""
        self.dock.show()
        self.dock.raise_()
        self.settings_tabs.setCurrentIndex(2)
        self.properties_panel.spot_x.setFocus()

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
        """Open a vehicle file; a bad file shows its located message and leaves the document untouched.

        Work still running for the old document is dropped at once (nothing waits for it)."""
        if confirm and not self.confirm_discard():
            return False
        try:
            v = Document.read(path)
        except VehicleFileError as e:
            dialogs.show_file_error(self, e)
            return False
        self.doc.replace(v, path)
        self._add_recent(path)
        self.fit_views()
        self.statusBar().showMessage(f"Opened {path}", 8000)
        return True

    def save_to(self, path) -> bool:
        try:
            self.doc.save(path)
        except (OSError, VehicleFileError) as e:
            dialogs.show_save_error(self, path, e)
            return False
        self._add_recent(path)
        self.statusBar().showMessage(f"Saved {path}", 8000)
        return True

    # ----- recovery --------------------------------------------------------------------
    def _edited(self, *_args) -> None:
        """After every change of the undo stack: schedule this window's recovery copy (debounced)."""
        if self.recovery is None:
            return
        try:
            modified = self.doc.modified
        except RuntimeError:  # the document is being destroyed with its window
            return
        if not modified:
            self._unsaved_since = None
            self.recovery_timer.stop()
            self.recovery.remove()  # nothing unsaved any more
            return
        now = time.monotonic()
        if self._unsaved_since is None:
            self._unsaved_since = now
        if now - self._unsaved_since >= RECOVERY_MAX_DELAY_S:
            self.write_recovery()  # edits keep coming: do not let the debounce postpone the copy for ever
        else:
            self.recovery_timer.start()

    def write_recovery(self) -> Path | None:
        """Write this window's recovery copy of unsaved work (atomic); remove it when nothing is unsaved."""
        self.recovery_timer.stop()
        if self.recovery is None:
            return None
        if not self.doc.modified:
            self.recovery.remove()
            return None
        try:
            path = self.recovery.write(self.doc.vehicle, self.doc.path)
        except OSError as e:
            self.statusBar().showMessage(f"The recovery copy could not be written: {e}", 15000)
            return None
        self._unsaved_since = time.monotonic()
        return path

    def offer_recovery(self) -> bool:
        """On start: offer every recovery copy left by a window that did not close normally.

        Ticked copies open (the first in this window when it holds no unsaved work, the others in
        new windows); declined ones are deleted; the rest stay for the next start. True when a copy
        was opened."""
        orphans = find_orphans(recovery_dir(self.settings))
        if not orphans:
            return False
        choice, ticked = dialogs.ask_recover(self, orphans)
        opened = False
        for i, o in enumerate(orphans):
            if i not in ticked or choice == "later":
                o.release()
            elif choice == "discard":
                o.discard()
            elif o.vehicle is None:
                dialogs.refuse(self, "Recover unsaved work", f"{o.path} cannot be opened: {o.problem}")
                o.release()
            else:
                win = self if not opened and not self.doc.modified else open_window(o.vehicle, None, self.settings)
                win.adopt_recovered(o.vehicle, o.original_path)
                o.discard()  # only now: the window has written its own copy of the work
                opened = True
        return opened

    def adopt_recovered(self, v: Vehicle, original_path: str) -> None:
        """Show recovered work as unsaved changes of ``original_path`` and copy it for recovery at once."""
        self.doc.replace(v, original_path or None)
        self.doc.undo_stack.resetClean()  # the recovered work is not saved
        self._update_title()
        self.write_recovery()
        self.statusBar().showMessage("Recovered unsaved work; save it to keep it.", 10000)

    def closeEvent(self, ev: QCloseEvent) -> None:
        if not self.confirm_discard():
            ev.ignore()
            return
        # nothing waits for a worker: each is asked to stop and finishes its current chunk unseen
        self.ranking.heatmap.abandon()
        self.ranking.figures.abandon()
        self.defence_panel.abandon()
        self.doc.abandon_work()
        if getattr(self, "report_export", None) is not None:
            self.report_export.cancel()
        if getattr(self, "fullwave_job", None) is not None:
            self.fullwave_job.cancel()
        self.recovery_timer.stop()
        if self.recovery is not None:
            self.recovery.close()  # a clean close: this window's copy is no longer needed
        ev.accept()


def open_window(v: Vehicle, path, settings: QSettings | None = None, autosave: bool = True) -> MainWindow:
    """Open another main window on ``v`` (kept alive until it is closed)."""
    win = MainWindow(Document(v, path), settings=settings, autosave=autosave)
    win.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose, True)
    _EXTRA_WINDOWS.append(win)
    win.destroyed.connect(lambda _o=None, w=win: _EXTRA_WINDOWS.remove(w) if w in _EXTRA_WINDOWS else None)
    win.show()
    win.ranking.heatmap.start()
    return win
