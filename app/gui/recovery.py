"""Recovery copies of unsaved work: one per window, never touched by another window.

Each window that has unsaved changes keeps ``recovery-<pid>-<token>.json`` in the recovery folder,
written atomically a couple of seconds after the last edit, beside ``recovery-<pid>-<token>.lock``:
a ``QLockFile`` the window holds while it is open (the lock records the process id, host and
program; Qt treats it as stale once that process is gone). The copy holds the vehicle, the file it
came from and the time it was written. A clean close (or a save) removes the window's own copy.

At start, every copy whose lock can be taken (its writer has gone without a clean close) is an
orphan and is offered; copies of windows still open, in this or another process, are left alone.

Folder: the ``recovery_folder`` setting when set (tests point it at a temporary folder), else the
program's data folder from ``QStandardPaths`` + ``recovery``.
"""

from __future__ import annotations

import json
import os
import socket
import time
import uuid
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QLockFile, QSettings, QStandardPaths

from core.vehicle import Vehicle, VehicleFileError, atomic_write_text, vehicle_from_dict, vehicle_to_dict

FORMAT = "wheelreach-recovery/1"
#: a recovery copy is written this long after the last edit, ms
DEBOUNCE_MS = 2000


def recovery_dir(settings: QSettings | None = None) -> Path:
    """The folder of the recovery copies (created when the first copy is written)."""
    if settings is not None:
        custom = settings.value("recovery_folder", "")
        if custom:
            return Path(str(custom))
    base = QStandardPaths.writableLocation(QStandardPaths.StandardLocation.AppDataLocation)
    return (Path(base) if base else Path.home() / ".wheelreach") / "recovery"


def _lock(path: Path) -> QLockFile:
    lock = QLockFile(str(path))
    lock.setStaleLockTime(0)  # never stale by age: only when its process is gone
    return lock


class RecoveryCopy:
    """The recovery copy of one window (files created on the first write)."""

    def __init__(self, folder: Path):
        self.folder = Path(folder)
        stem = f"recovery-{os.getpid()}-{uuid.uuid4().hex[:10]}"
        self.path = self.folder / f"{stem}.json"
        self.lock_path = self.folder / f"{stem}.lock"
        self._lock: QLockFile | None = None

    def write(self, vehicle: Vehicle, original_path: str | Path | None) -> Path:
        """Write the copy atomically (holding this window's lock first); returns its path."""
        if self._lock is None:
            self.folder.mkdir(parents=True, exist_ok=True)
            lock = _lock(self.lock_path)
            if not lock.tryLock(0):
                raise OSError(f"cannot lock {self.lock_path}")
            self._lock = lock
        now = time.time()
        payload = {
            "format": FORMAT,
            "original_path": str(original_path or ""),
            "saved_at": time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(now)),
            "saved_at_epoch_s": now,
            "pid": os.getpid(),
            "host": socket.gethostname(),
            "vehicle": vehicle_to_dict(vehicle),
        }
        atomic_write_text(self.path, json.dumps(payload, indent=1))
        return self.path

    def exists(self) -> bool:
        return self.path.exists()

    def remove(self) -> None:
        """Remove the copy (nothing unsaved any more); the window keeps its lock."""
        try:
            self.path.unlink()
        except FileNotFoundError:
            pass

    def close(self) -> None:
        """Clean close of the window: remove the copy and release (delete) the lock."""
        self.remove()
        if self._lock is not None:
            self._lock.unlock()
            self._lock = None


@dataclass
class Orphan:
    """A recovery copy whose window did not close normally (its lock is held by us while offered)."""

    path: Path
    original_path: str
    saved_at: str
    vehicle: Vehicle | None
    problem: str = ""
    lock: QLockFile | None = None

    @property
    def title(self) -> str:
        return Path(self.original_path).name if self.original_path else "untitled vehicle"

    def discard(self) -> None:
        """Delete the copy (the user declined it) and its lock."""
        try:
            self.path.unlink()
        except FileNotFoundError:
            pass
        self.release()

    def release(self) -> None:
        """Keep the copy for a later start; drop our hold on its lock."""
        if self.lock is not None:
            self.lock.unlock()
            self.lock = None


def find_orphans(folder: Path) -> list[Orphan]:
    """Recovery copies in ``folder`` whose writer is gone, oldest first; their locks are taken."""
    folder = Path(folder)
    if not folder.is_dir():
        return []
    out = []
    for f in folder.glob("recovery*.json"):
        lock = _lock(f.with_suffix(".lock"))
        if not lock.tryLock(0):
            continue  # its window is open (in this process or another one)
        if not f.exists():  # removed by its window between the listing and the lock
            lock.unlock()
            continue
        original, saved, vehicle, problem = "", "", None, ""
        try:
            payload = json.loads(f.read_text(encoding="utf-8"))
            original = str(payload.get("original_path") or "")
            saved = str(payload.get("saved_at") or "")
            vehicle = vehicle_from_dict(payload["vehicle"])
        except VehicleFileError as e:
            problem = f"the copy does not load: {e}"
        except (OSError, ValueError, KeyError, TypeError, AttributeError) as e:
            problem = f"the copy is unreadable: {e}"
        if not saved:
            saved = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(f.stat().st_mtime))
        out.append(Orphan(f, original, saved, vehicle, problem, lock))
    out.sort(key=lambda o: o.saved_at)
    return out
