"""Autosave of unsaved work, recovery after a crash, and the crash log.

Each running window holds an OS file lock on ``autosave/<id>.lock`` in the per-user data folder (the
kernel releases it when the process dies, however it dies). While the document has unsaved changes it
is written to ``<id>.orbitdesk`` every ~20 s and shortly after each change, with ``<id>.json`` saying
which file it belongs to. On a clean exit the files go away. At start-up, files whose lock can be taken
belong to a session that crashed; their work is offered for recovery.

For tests and scripts, ``ORBITDESK_RECOVERY=restore`` (or ``discard``) answers the question without a
dialog; ``set_auto_answer()`` does the same in-process; with ``ORBITDESK_NO_DIALOGS`` set and no answer
given, the work is kept on disk and nothing is asked. ``ORBITDESK_DATA_DIR`` overrides the data folder.
"""

from __future__ import annotations

import faulthandler
import json
import os
import secrets
import time
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QObject, QStandardPaths, Qt, QTimer, Signal
from PySide6.QtWidgets import QMessageBox

from orbitdesk.document import project as core_project
from orbitdesk.document.project import ProjectError
from orbitdesk.document.safe_files import DiskState, plain_reason
from orbitdesk.language.model_file import read_regular

from orbitdesk.app.plain_text import message_box, plain_message

AUTOSAVE_INTERVAL_MS = 20_000
CHANGE_DELAY_MS = 2_000
ENV_ANSWER = "ORBITDESK_RECOVERY"
ENV_DATA_DIR = "ORBITDESK_DATA_DIR"
RESTORE, DISCARD, KEEP = "restore", "discard", "keep"

_auto_answer: str | None = None
_crash_log_file = None


def set_auto_answer(answer: str | None) -> None:
    """Answer the recovery question with RESTORE or DISCARD without asking (None: ask again)."""
    global _auto_answer
    _auto_answer = answer


def data_dir() -> Path:
    """The per-user data folder (created if missing)."""
    override = os.environ.get(ENV_DATA_DIR)
    if override:
        path = Path(override)
    else:
        location = QStandardPaths.writableLocation(QStandardPaths.StandardLocation.AppDataLocation)
        path = Path(location) if location else Path.home() / ".orbitdesk"
    path.mkdir(parents=True, exist_ok=True)
    return path


def autosave_dir() -> Path:
    path = data_dir() / "autosave"
    path.mkdir(parents=True, exist_ok=True)
    return path


def log_dir() -> Path:
    path = data_dir() / "logs"
    path.mkdir(parents=True, exist_ok=True)
    return path


def enable_crash_log() -> Path:
    """Hard crashes (segmentation faults and the like) write the Python stacks to logs/crash.log."""
    global _crash_log_file
    path = log_dir() / "crash.log"
    if _crash_log_file is None:
        _crash_log_file = open(path, "a", encoding="utf-8")  # noqa: SIM115 - kept open for faulthandler
        _crash_log_file.write(f"--- OrbitDesk started {time.strftime('%Y-%m-%d %H:%M:%S')} pid {os.getpid()}\n")
        _crash_log_file.flush()
        faulthandler.enable(file=_crash_log_file, all_threads=True)
    return path


# ---------------------------------------------------------------- file locks

class FileLock:
    """An exclusive, non-blocking OS lock held on an open file; released by the OS if the process dies."""

    def __init__(self, path: Path):
        self.path = Path(path)
        self._fd: int | None = None

    def acquire(self) -> bool:
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o600)
        try:
            if os.name == "nt":
                import msvcrt

                msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            else:
                import fcntl

                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            return False
        self._fd = fd
        return True

    def release(self, remove: bool = True) -> None:
        if self._fd is None:
            return
        if remove:
            _unlink(self.path)  # unlink while still holding the lock, so no one takes a stale one
        os.close(self._fd)
        self._fd = None

    @property
    def held(self) -> bool:
        return self._fd is not None


def _unlink(path: Path) -> None:
    try:
        os.unlink(path)
    except FileNotFoundError:
        pass
    except OSError:
        pass


# ---------------------------------------------------------------- what a crashed session left

@dataclass
class Recoverable:
    session_id: str
    autosave: Path
    original_path: Path | None
    name: str
    saved_at: float
    directory: Path
    original_state: object = core_project.UNCHECKED  # what the original file was when last opened or saved

    def load(self):
        return core_project.load(self.autosave)

    def files(self) -> list[Path]:
        d, i = self.directory, self.session_id
        return [d / f"{i}.orbitdesk", d / f"{i}.orbitdesk.bak", d / f"{i}.json", d / f"{i}.lock"]

    def discard(self) -> None:
        for f in self.files():
            _unlink(f)


def _read_meta(path: Path) -> dict:
    try:
        data = json.loads(read_regular(path, 1_000_000)[0].decode("utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def find_recoverable(directory: Path | None = None) -> list[Recoverable]:
    """Work left by sessions that ended without cleaning up (newest first). Leftovers without unsaved
    work are removed; sessions still running (lock held) are left alone."""
    directory = Path(directory) if directory is not None else autosave_dir()
    found = []
    ids = {p.name.split(".", 1)[0] for p in directory.glob("*") if p.suffix in (".lock", ".json", ".orbitdesk")}
    for session_id in sorted(ids):
        lock = FileLock(directory / f"{session_id}.lock")
        if not lock.acquire():
            continue  # a live session
        try:
            autosave = directory / f"{session_id}.orbitdesk"
            meta = _read_meta(directory / f"{session_id}.json")
            rec = Recoverable(session_id, autosave, None, str(meta.get("name") or "Untitled"),
                              float(meta.get("saved_at") or 0.0), directory)
            original = meta.get("original_path")
            if isinstance(original, str) and original:
                rec.original_path = Path(original)
                rec.original_state = DiskState.from_json(meta.get("original_state")) or core_project.UNCHECKED
            if autosave.exists():
                if not rec.saved_at:
                    rec.saved_at = autosave.stat().st_mtime
                found.append(rec)
            else:
                rec.discard()
        finally:
            lock.release(remove=False)
    return sorted(found, key=lambda r: r.saved_at, reverse=True)


# ---------------------------------------------------------------- autosave of the running session

class Autosaver(QObject):
    """Writes the session's unsaved work to the autosave folder on a timer and soon after changes."""

    saved = Signal(str)    # path of the autosave file
    failed = Signal(str)   # autosave stopped working (plain message); emitted once until it works again
    recovered = Signal()   # autosave works again after a failure

    def __init__(self, session, parent=None, directory: Path | None = None,
                 interval_ms: int = AUTOSAVE_INTERVAL_MS, delay_ms: int = CHANGE_DELAY_MS):
        super().__init__(parent)
        self.session = session
        self.directory = Path(directory) if directory is not None else autosave_dir()
        self.directory.mkdir(parents=True, exist_ok=True)
        self.session_id = f"s{os.getpid()}-{secrets.token_hex(4)}"
        self.lock = FileLock(self.directory / f"{self.session_id}.lock")
        if not self.lock.acquire():
            raise OSError(f"cannot lock {self.lock.path}")
        self.path = self.directory / f"{self.session_id}.orbitdesk"
        self.meta_path = self.directory / f"{self.session_id}.json"
        self.failing: str | None = None  # the plain message while autosave does not work
        try:
            self._write_meta(saved_at=0.0)
        except OSError as e:  # e.g. a full disk: keep trying on the timer
            self.failing = _autosave_problem(self.directory, e)
        self.timer = QTimer(self, interval=interval_ms)
        self.timer.timeout.connect(self.autosave_now)
        self.timer.start()
        self.soon = QTimer(self, singleShot=True, interval=delay_ms)
        self.soon.timeout.connect(self.autosave_now)
        session.undo_stack.indexChanged.connect(self._changed)
        session.dirtyChanged.connect(self._dirty_changed)
        session.projectLoaded.connect(self._changed)

    def _changed(self, *_args) -> None:
        if not self.soon.isActive():  # throttled: at most one write per delay after a burst of edits
            self.soon.start()

    def _dirty_changed(self, dirty: bool) -> None:
        if not dirty:
            self.soon.stop()
            self._remove_autosave()

    def _write_meta(self, saved_at: float) -> None:
        s = self.session
        meta = {"pid": os.getpid(), "name": s.name, "saved_at": saved_at,
                "original_path": str(s.path) if s.path is not None else None,
                "original_state": s.disk_state.to_json() if isinstance(s.disk_state, DiskState) else None}
        tmp = self.meta_path.with_suffix(".json.tmp")
        tmp.write_text(json.dumps(meta), encoding="utf-8")
        os.replace(tmp, self.meta_path)

    def autosave_now(self) -> bool:
        """Write the unsaved work now (or remove the autosave if nothing is unsaved)."""
        if not self.lock.held:
            return False
        if not self.session.dirty:
            self._remove_autosave()
            return False
        try:
            self.directory.mkdir(parents=True, exist_ok=True)  # back again if it was removed meanwhile
            core_project.save(self.path, self.session.to_project(), force=True)
            self._write_meta(saved_at=time.time())
        except (ProjectError, OSError) as e:
            first = self.failing is None
            self.failing = _autosave_problem(self.directory, e)
            if first:
                self.failed.emit(self.failing)
            return False
        if self.failing is not None:
            self.failing = None
            self.recovered.emit()
        self.saved.emit(str(self.path))
        return True

    def _remove_autosave(self) -> None:
        _unlink(self.path)
        _unlink(Path(str(self.path) + ".bak"))

    def finish(self) -> None:
        """Clean exit: nothing to recover next time."""
        self.timer.stop()
        self.soon.stop()
        if self.lock.held:
            self._remove_autosave()
            _unlink(self.meta_path)
            self.lock.release(remove=True)


def _autosave_problem(directory: Path, e: Exception) -> str:
    return f"Unsaved work cannot be kept safe: autosave failed ({plain_reason(e)}).\nAutosave folder: {directory}"


# ---------------------------------------------------------------- offering recovery

def _answer(parent, rec: Recoverable) -> str:
    forced = _auto_answer or os.environ.get(ENV_ANSWER, "").strip().lower()
    if forced in (RESTORE, DISCARD):
        return forced
    if os.environ.get("ORBITDESK_NO_DIALOGS"):
        return KEEP  # nobody to ask: leave the work on disk for a later start
    when = time.strftime("%Y-%m-%d %H:%M", time.localtime(rec.saved_at)) if rec.saved_at else "recently"
    where = f"\nIt belongs to {rec.original_path}." if rec.original_path else ""
    box = QMessageBox(parent)
    box.setIcon(QMessageBox.Icon.Question)
    box.setWindowTitle("Restore unsaved work?")
    box.setTextFormat(Qt.TextFormat.PlainText)  # the name comes from the file
    box.setText(f"OrbitDesk did not close normally last time.\n\nUnsaved work on “{rec.name}” "
                f"from {when} was kept.{where}")
    box.setInformativeText("Restore it now? If you discard it, it cannot be brought back.")
    restore = box.addButton("Restore", QMessageBox.ButtonRole.AcceptRole)
    box.addButton("Discard", QMessageBox.ButtonRole.DestructiveRole)
    box.setDefaultButton(restore)
    box.exec()
    return RESTORE if box.clickedButton() is restore else DISCARD


def offer_recovery(window, directory: Path | None = None) -> bool:
    """If a crashed session left unsaved work, offer it; returns True if it was restored."""
    recs = find_recoverable(directory)
    if not recs:
        return False
    rec = recs[0]
    answer = _answer(window, rec)
    if answer != RESTORE:
        if answer == DISCARD:
            rec.discard()
        return False
    try:
        project = rec.load()
    except ProjectError as e:
        plain_message(window, "warning", "Could not restore", f"The saved work could not be read: {e.message}")
        return False
    except Exception as e:  # noqa: BLE001 - recovery must never stop the app from starting
        plain_message(window, "warning", "Could not restore", f"The saved work could not be read: {e}")
        return False
    original = rec.original_path if rec.original_path is not None and rec.original_path.exists() else None
    try:
        # saving the restored work checks that the original was not changed since the crashed session read it
        window.session.load_project(project, original, rec.original_state if original is not None
                                    else core_project.UNCHECKED)
    except Exception as e:  # noqa: BLE001 - the document failed: offer its text instead of crashing
        try:
            window.session.new()
        except Exception:  # noqa: BLE001 - whatever the half-loaded state, the window stays up
            pass
        if offer_text(window, project.model, f"{type(e).__name__}: {e}"):
            rec.discard()
        return False
    window.session.mark_dirty()
    rec.discard()
    window.statusBar().showMessage(f"Restored unsaved work on “{project.name}”", 10_000)
    return True


def offer_text(window, text: str, reason: str) -> bool:
    """The restored document could not be opened: show its model text (plain text) to copy or save.

    Returns True when the text was saved to a file the user chose. Without anyone to ask
    (``ORBITDESK_NO_DIALOGS``) nothing is shown and the work stays in the autosave folder."""
    window.statusBar().showMessage("The restored work could not be opened; its model text is kept", 10_000)
    if os.environ.get("ORBITDESK_NO_DIALOGS"):
        return False
    from PySide6.QtWidgets import QFileDialog

    box = message_box(window, "warning", "Restored work could not be opened",
                      "The unsaved work was found, but opening it failed:\n" + reason[:300], buttons=QMessageBox.StandardButton.NoButton)
    box.setInformativeText("Its model text is under Show Details: copy it from there, or save it as a text file.")
    box.setDetailedText(text)
    save = box.addButton("Save Text As\u2026", QMessageBox.ButtonRole.AcceptRole)
    box.addButton("Keep for Later", QMessageBox.ButtonRole.RejectRole)
    box.exec()
    if box.clickedButton() is not save:
        return False
    path, _ = QFileDialog.getSaveFileName(window, "Save the model text", str(Path.home() / "restored-model.txt"))
    if not path:
        return False
    try:
        Path(path).write_text(text, encoding="utf-8")
    except OSError as e:
        plain_message(window, "warning", "Could not save", f"{path}: {e.strerror or e}")
        return False
    return True
