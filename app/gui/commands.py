"""The program's commands: plain functions taking the document (and the window that hosts dialogs).

Menus and shortcuts are built from ``COMMANDS`` in one place (``MainWindow._build_menus``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from PySide6.QtWidgets import QDialog, QFileDialog

from app.gui import dialogs, edits
from app.gui.document import Document

FILE_FILTER = "Wheelreach vehicle (*.json);;All files (*)"
SNAP_GRID_M = 0.025


@dataclass(frozen=True)
class Command:
    menu: str
    label: str
    func: Callable[[Document, object], object]
    shortcut: str = ""
    tip: str = ""
    checkable: bool = False
    enabled_when: str = ""  # "spot" (a spot is selected), "undo", "redo"


# ----- files -------------------------------------------------------------------------
def apply_imported(doc: Document, ui, imp, zone: tuple[str, str] | None = None) -> bool:
    """Put an imported or traced outline (core.body_import.Imported) into the body, or as the zone
    ``zone`` = (name, material), as ONE undoable edit.

    The vehicle is rebuilt and checked like a loaded file first; a refusal (e.g. the wheels now lie
    outside the outline) is shown with its reason and changes nothing."""
    from core.body_import import apply_outlines
    from core.vehicle import VehicleFileError

    kw = {"zones": ((zone[0], zone[1], imp),)} if zone else {imp.view: imp}
    what = f"zone {zone[0]!r}" if zone else f"{imp.view} outline"
    try:
        apply_outlines(doc.vehicle, **kw)
    except VehicleFileError as e:
        if ui is not None:
            dialogs.refuse(ui, "Import body outline", f"The {what} from {imp.source} does not fit this vehicle; "
                                                      f"nothing changed.\n\n{e}")
        return False
    return doc.apply(lambda v: apply_outlines(v, **kw), f"Import {what} from {imp.source}")


def import_body_outline(doc: Document, ui) -> None:
    from app.gui.body_import import ImportOutlineDialog

    dlg = ImportOutlineDialog(ui, ui.last_folder(), sorted(doc.vehicle.material_names()))
    if dlg.exec() == QDialog.DialogCode.Accepted and dlg.result_outline is not None:
        apply_imported(doc, ui, dlg.result_outline, dlg.zone())


def trace_body_outline(doc: Document, ui) -> None:
    from app.gui.body_import import TraceDialog

    dlg = TraceDialog(ui, ui.last_folder())
    dlg.resize(1100, 640)
    if dlg.exec() == QDialog.DialogCode.Accepted and dlg.result_outline is not None:
        apply_imported(doc, ui, dlg.result_outline)


def new_file(doc: Document, ui) -> None:
    if ui.confirm_discard():
        doc.replace(edits.new_vehicle(), None)


def open_file(doc: Document, ui) -> None:
    if not ui.confirm_discard():
        return
    path, _ = QFileDialog.getOpenFileName(ui, "Open a vehicle file", ui.last_folder(), FILE_FILTER)
    if path:
        ui.open_path(path, confirm=False)


def save_file(doc: Document, ui) -> bool:
    if doc.path is None:
        return save_file_as(doc, ui)
    return ui.save_to(doc.path)


def save_file_as(doc: Document, ui) -> bool:
    start = str(doc.path) if doc.path else ui.last_folder()
    path, _ = QFileDialog.getSaveFileName(ui, "Save the vehicle file as", start, FILE_FILTER)
    if not path:
        return False
    if not path.lower().endswith(".json"):
        path += ".json"
    return ui.save_to(path)


def quit_program(doc: Document, ui) -> None:
    ui.close()


# ----- edit --------------------------------------------------------------------------
def undo(doc: Document, ui) -> None:
    doc.undo_stack.undo()


def redo(doc: Document, ui) -> None:
    doc.undo_stack.redo()


def toggle_snap(doc: Document, ui) -> None:
    doc.snap_m = None if doc.snap_m else SNAP_GRID_M
    state = f"on ({SNAP_GRID_M * 1000:.0f} mm)" if doc.snap_m else "off"
    doc.statusMessage.emit(f"Snap to grid {state}")


def delete_wheel(doc: Document, ui) -> None:
    """Edit > Delete wheel: choose a wheel and remove it (one undo step); the last wheel stays."""
    v = doc.vehicle
    if len(v.wheels) == 1:
        dialogs.refuse(ui, "Delete a wheel", f"Wheel {v.wheels[0].id} is the vehicle's only wheel and cannot be "
                       "deleted: a vehicle needs at least one wheel. Add another wheel to the file first.")
        return
    wid = dialogs.ask_wheel(ui, "Delete a wheel", [w.id for w in v.wheels])
    if wid:
        doc.apply(lambda vv: edits.delete_wheel(vv, wid), f"Delete wheel {wid}")


# ----- spots -------------------------------------------------------------------------
def add_spot(doc: Document, ui) -> None:
    """Add a spot at the centre of the mounting region (or of the body) and select it."""
    v = doc.vehicle
    name = dialogs.ask_spot_name(ui, "Add a receiver spot", edits.unique_spot_name(v))
    if name is None:
        return
    if v.regions:
        import numpy as np

        r = v.regions[doc.region_index]
        c = np.asarray(r.outline).mean(axis=0)
        pos = (c[0], c[1], r.height_m) if r.view == "top" else (c[0], r.lateral_m, c[1])
    else:
        pos = doc.spot_position(doc.selected) if doc.selected else (-1.0, 0.0, 0.5)
    if doc.apply(lambda vv: edits.add_spot(vv, name, pos), f"Add spot '{name}'"):
        doc.select(name)


def rename_spot(doc: Document, ui) -> None:
    old = doc.selected
    if not old:
        return
    new = dialogs.ask_spot_name(ui, "Rename the receiver spot", old)
    if new and new != old and doc.apply(lambda v: edits.rename_spot(v, old, new), f"Rename spot '{old}' to '{new}'"):
        doc.select(new)


def delete_spot(doc: Document, ui) -> None:
    name = doc.selected
    if name:
        doc.apply(lambda v: edits.delete_spot(v, name), f"Delete spot '{name}'")


def spot_axis(doc: Document, ui) -> None:
    name = doc.selected
    if not name:
        return
    spot = doc.vehicle.spots[edits.spot_index(doc.vehicle, name)]
    dlg = dialogs.AxisDialog(ui, name, spot.axis)
    if dlg.exec() == QDialog.DialogCode.Accepted:
        axis = dlg.axis()
        doc.apply(lambda v: edits.set_spot_axis(v, name, axis), f"Antenna axis of '{name}'")


# ----- view / heatmap ------------------------------------------------------------------
def fit_views(doc: Document, ui) -> None:
    ui.fit_views()


def show_properties(doc: Document, ui) -> None:
    """Show the Properties tab (exact values of the selected spot, wheel, zone and region)."""
    ui.show_properties()


def compute_heatmap(doc: Document, ui) -> None:
    ui.ranking.heatmap.start()


def cancel_heatmap(doc: Document, ui) -> None:
    ui.ranking.heatmap.cancel()


# ----- help --------------------------------------------------------------------------
def export_report(doc: Document, ui) -> None:
    """File > Export report: the placement report of the document as it stands (saved file or edits),
    computed in a worker while the window stays usable."""
    from app.gui.report_export import export_report

    ui.report_export = export_report(ui, doc.path if doc.path and doc.undo_stack.isClean() else doc.vehicle)


def import_measurements(doc: Document, ui) -> None:
    """File > Import measurements: fit the model to measured levels of this vehicle (app.gui.measurements_window)."""
    from app.gui.measurements_window import open_measurements_window

    path, _ = QFileDialog.getOpenFileName(ui, "Import measurements", ui.last_folder(),
                                          "Measurement files (*.csv);;All files (*)")
    if path:
        ui.measurements_window = open_measurements_window(ui, doc, path)


def compare_bodies(doc: Document, ui) -> None:
    """Tools > Compare bodies: one spot for several body styles, starting with the open document as edited."""
    from app.gui.compare_window import open_compare_window

    saved = str(doc.path) if doc.path and not doc.modified else None
    ui.compare_window = open_compare_window(ui, document=(doc.vehicle, saved))


def confirm_fullwave(doc: Document, ui) -> None:
    """Tools > Confirm with full-wave: the best spots through the full-wave model, in a worker."""
    from app.gui.confirm_window import confirm_fullwave as run

    run(ui)


def help_usage(doc: Document, ui) -> None:
    ui.help_dialog = dialogs.show_help(ui, "Usage")


def help_caution(doc: Document, ui) -> None:
    ui.help_dialog = dialogs.show_help(ui, "Caution")


def about(doc: Document, ui) -> None:
    dialogs.about(ui)


COMMANDS: tuple[Command, ...] = (
    Command("&File", "&New", new_file, "Ctrl+N", "Start a new vehicle from a plain body"),
    Command("&File", "&Open...", open_file, "Ctrl+O", "Open a vehicle file"),
    Command("&File", "&Save", save_file, "Ctrl+S", "Save the vehicle file"),
    Command("&File", "Save &as...", save_file_as, "Ctrl+Shift+S", "Save under a new name"),
    Command("&File", "&Import body outline...", import_body_outline, "Ctrl+I",
            "Replace the top or side outline with one from a DXF or SVG drawing (undoable)"),
    Command("&File", "&Trace body over a picture...", trace_body_outline, "Ctrl+T",
            "Click the top or side outline over a drawing or photo, scaled by two points (undoable)"),
    Command("&File", "Export &report...", export_report, "Ctrl+Shift+E", "Write the placement report (PDF, with CSV/JSON data)"),
    Command("&File", "&Import measurements...", import_measurements, "Ctrl+Shift+I",
            "Fit the model to measured levels of this vehicle (CSV, docs/measurement-format.md)"),
    Command("&File", "&Quit", quit_program, "Ctrl+Q", "Close the program"),
    Command("&Edit", "&Undo", undo, "Ctrl+Z", "Undo the last edit", enabled_when="undo"),
    Command("&Edit", "&Redo", redo, "Ctrl+Shift+Z", "Redo the edit undone last", enabled_when="redo"),
    Command("&Edit", "Delete &wheel...", delete_wheel, "", "Remove one wheel of the vehicle (undoable)"),
    Command("&Edit", "Snap to &grid", toggle_snap, "Ctrl+G", f"Round dragged positions to {SNAP_GRID_M * 1000:.0f} mm",
            checkable=True),
    Command("&Spots", "&Add spot...", add_spot, "Ctrl+Shift+A", "Add a receiver spot at the centre of the mounting region"),
    Command("&Spots", "&Rename spot...", rename_spot, "F2", "Rename the selected spot", enabled_when="spot"),
    Command("&Spots", "Antenna &axis...", spot_axis, "Ctrl+Shift+X", "Set the selected spot's antenna axis",
            enabled_when="spot"),
    Command("&Spots", "&Delete spot", delete_spot, "Del", "Delete the selected spot", enabled_when="spot"),
    Command("&View", "&Fit views", fit_views, "Ctrl+0", "Show the whole body in both views"),
    Command("&View", "&Properties (exact values)", show_properties, "Ctrl+E",
            "Type exact values of the selected spot, wheel, zone and region"),
    Command("&View", "&Compute heatmap", compute_heatmap, "F5", "Compute the margin over the mounting region"),
    Command("&View", "Ca&ncel heatmap", cancel_heatmap, "Esc", "Stop the heatmap computation"),
    Command("&Tools", "&Compare bodies...", compare_bodies, "Ctrl+Shift+C", "Compare spots across several body files"),
    Command("&Tools", "Confirm with &full-wave...", confirm_fullwave, "Ctrl+Shift+F",
            "Run the full-wave (NEC-2) model for the best spots beside the fast levels (minutes per body; "
            "needs the fullwave extra)"),
    Command("&Help", "&Using the program", help_usage, "F1", "README: set-up, usage and file format pointers"),
    Command("&Help", "&Cautions", help_caution, "", "README: limits of the results"),
    Command("&Help", "&About Wheelreach", about, "", "Version, models and the safety caution"),
)
