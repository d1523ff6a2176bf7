"""Saving from the window without losing anyone's work: a file changed on disk by another window or
program, a file open in two windows, read-only files, autosave failures and an unusable data folder.
Each question is answered by a stand-in for ``file_guard.ask``; the file on disk is checked after each
answer. Screenshots of each new dialog go to test-artifacts/."""

import errno
import os
import subprocess
import sys

import pytest
from PySide6.QtWidgets import QFileDialog

from orbitdesk.document import open_markers
from orbitdesk.document import safe_files
from orbitdesk.document import project as core_project
from orbitdesk.document.project import ParameterSetting, Project, ProjectError
from orbitdesk.app import file_guard
from orbitdesk.app import recovery
from orbitdesk.app.plain_text import message_box

from .test_recovery import child_env

MODEL = "# spring\nx'' = -w^2*x\nw = 2 in [0.5, 4]\nx(0) = 1\nx'(0) = 0\n"


class Answers:
    """Stands in for ``file_guard.ask``: records each question and gives the queued answers."""

    def __init__(self, *answers):
        self.queue = list(answers)
        self.asked = []

    def __call__(self, parent, title, text, informative, choices, default, unattended=file_guard.CANCEL):
        self.asked.append((title, text, [c[0] for c in choices]))
        return self.queue.pop(0)

    @property
    def titles(self):
        return [a[0] for a in self.asked]


@pytest.fixture
def answers(monkeypatch):
    a = Answers()
    monkeypatch.setattr(file_guard, "ask", a)
    return a


@pytest.fixture
def warnings(message_boxes):
    return message_boxes.calls  # (kind, title, text) of each plain-text message box


def texts(calls, kind="warning"):
    return [text for k, _title, text in calls if k == kind]


@pytest.fixture
def shown(monkeypatch):
    dialogs = []
    monkeypatch.setattr(file_guard, "show_dialog", dialogs.append)
    return dialogs


def w_on_disk(path) -> float:
    return core_project.load(path).parameters["w"].value


def project(w: float, model: str = MODEL, **kw) -> Project:
    return Project(name="spring", model=model, parameters={"w": ParameterSetting(w, 0.5, 4.0)},
                   initial={"x": 1.0, "x'": 0.0}, **kw)


@pytest.fixture
def changed_behind(window, tmp_path):
    """The window has spring.orbitdesk open with w = 3 unsaved; another writer has since saved w = 1."""
    path = tmp_path / "spring.orbitdesk"
    core_project.save(path, project(2.0))
    assert window.open_path(path)
    retuned = MODEL.replace("# spring", "# spring, retuned by another program").replace("x(0) = 1", "x(0) = 1.5")
    core_project.save(path, project(1.0, retuned, notes="written by another program"))
    window.session.set_param("w", 3.0)
    return path


# ---------------------------------------------------------------- changed on disk

def test_cancel_and_compare_leave_the_file_alone(qtbot, window, changed_behind, answers, shown):
    answers.queue = [file_guard.COMPARE, file_guard.CANCEL]
    assert not window.save()
    assert answers.titles == ["File changed on disk"] * 2
    assert answers.asked[0][2] == [file_guard.COMPARE, file_guard.SAVE_AS, file_guard.RELOAD,
                                   file_guard.OVERWRITE, file_guard.CANCEL]
    assert w_on_disk(changed_behind) == 1.0 and window.session.dirty
    (dialog,) = shown
    changes = dialog.changes.toPlainText()
    assert "Parameter w: 3 in [0.5, 4] here, 1 in [0.5, 4] on disk" in changes and "Notes differ" in changes


def test_overwrite_replaces_and_keeps_theirs_as_backup(qtbot, window, changed_behind, answers):
    answers.queue = [file_guard.OVERWRITE]
    assert window.save()
    assert w_on_disk(changed_behind) == 3.0 and not window.session.dirty
    assert w_on_disk(str(changed_behind) + ".bak") == 1.0
    window.session.set_param("w", 2.5)
    assert window.save() and len(answers.asked) == 1  # our own last save is what we expect now
    assert w_on_disk(changed_behind) == 2.5


def test_save_as_keeps_both(qtbot, window, changed_behind, answers, monkeypatch, tmp_path):
    answers.queue = [file_guard.SAVE_AS]
    other = tmp_path / "mine.orbitdesk"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(other), "")))
    assert window.save()
    assert w_on_disk(changed_behind) == 1.0 and w_on_disk(other) == 3.0
    assert window.session.path == other and not window.session.dirty


def test_reload_takes_the_file_from_disk(qtbot, window, changed_behind, answers):
    answers.queue = [file_guard.RELOAD]
    assert not window.save()
    assert window.session.params["w"] == 1.0 and not window.session.dirty
    assert w_on_disk(changed_behind) == 1.0
    window.session.set_param("w", 1.5)
    assert window.save() and len(answers.asked) == 1  # the reloaded state is the expected one
    assert w_on_disk(changed_behind) == 1.5


def test_removed_file_offers_to_save_it_again(qtbot, window, changed_behind, answers):
    changed_behind.unlink()
    answers.queue = [file_guard.OVERWRITE]
    assert window.save()
    assert answers.titles == ["File removed"] and w_on_disk(changed_behind) == 3.0


# ---------------------------------------------------------------- one file, two windows

def test_second_window_on_an_open_file_is_warned(qtbot, window, tmp_path, answers):
    from orbitdesk.app.main_window import MainWindow

    path = tmp_path / "spring.orbitdesk"
    core_project.save(path, project(2.0))
    assert window.open_path(path) and answers.asked == []
    second = MainWindow()
    qtbot.addWidget(second)
    try:
        answers.queue = [file_guard.CANCEL, file_guard.OPEN]
        assert not second.open_path(path) and second.session.path is None
        assert answers.titles == ["Already open"] and "another window of this OrbitDesk" in answers.asked[0][1]
        assert second.open_path(path) and second.session.path == path
        # Both edit; the first save wins, the second is asked instead of silently overwriting it.
        window.session.set_param("w", 3.0)
        assert window.save()
        second.session.set_param("w", 0.75)
        answers.queue = [file_guard.CANCEL]
        assert not second.save()
        assert answers.titles[-1] == "File changed on disk" and w_on_disk(path) == 3.0
        # Once the first window has closed, opening the file again does not warn.
        assert window.close()
        n = len(answers.asked)
        third = MainWindow()
        qtbot.addWidget(third)
        second.guard.release()
        assert third.open_path(path) and len(answers.asked) == n
        third.close()
    finally:
        second.session.undo_stack.setClean()
        second.close()


def test_markers_of_other_processes(qtbot, window, tmp_path, answers):
    path = tmp_path / "spring.orbitdesk"
    core_project.save(path, project(2.0))
    folder = file_guard.markers_dir()
    assert folder is not None and not folder.is_relative_to(tmp_path)  # never beside the project
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    key = open_markers._key(path)
    dead = folder / f"{key}.{safe_files.HOST_TAG}-{proc.pid}-aaaaaaaaaaaa.json"
    live = folder / f"{key}.{safe_files.HOST_TAG}-{os.getppid()}-bbbbbbbbbbbb.json"
    folder.mkdir(parents=True, exist_ok=True)
    dead.write_text('{"opened_at": 0}')
    assert window.open_path(path) and answers.asked == [] and not dead.exists()  # a dead process: ignored
    window.guard.release()
    live.write_text('{"opened_at": 0, "host": "here"}')
    try:
        answers.queue = [file_guard.OPEN]
        window.session.new()
        assert window.open_path(path)
        assert f"OrbitDesk process {os.getppid()} on this computer" in answers.asked[0][1]
    finally:
        live.unlink()
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


# ---------------------------------------------------------------- read-only files

@pytest.mark.parametrize("answer", [file_guard.CANCEL, file_guard.OVERWRITE, file_guard.SAVE_AS])
def test_read_only_file_is_not_replaced_without_asking(qtbot, window, tmp_path, answers, monkeypatch, answer):
    path = tmp_path / "published.orbitdesk"
    core_project.save(path, project(2.0))
    os.chmod(path, 0o444)
    assert window.open_path(path)
    window.session.set_param("w", 3.0)
    answers.queue = [answer]
    other = tmp_path / "copy.orbitdesk"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(other), "")))
    assert window.save() == (answer != file_guard.CANCEL)
    assert answers.titles == ["Read-only file"]
    assert w_on_disk(path) == (3.0 if answer == file_guard.OVERWRITE else 2.0)
    assert (path.stat().st_mode & 0o777) == 0o444
    assert other.exists() == (answer == file_guard.SAVE_AS)


# ---------------------------------------------------------------- autosave failures

def test_failed_autosave_is_told_once_and_its_return_too(qtbot, window, tmp_path, monkeypatch, warnings):
    saver = recovery.Autosaver(window.session, parent=window, directory=tmp_path / "autosave",
                               interval_ms=60_000, delay_ms=60_000)
    notice = file_guard.AutosaveNotice(window, saver)
    real_save = core_project.save

    def full_disk(*args, **kwargs):
        raise ProjectError("$", "could not save: No space left on device") from OSError(errno.ENOSPC, "full")

    try:
        window.session.set_param("w", 3.0)
        monkeypatch.setattr(core_project, "save", full_disk)
        assert not any(saver.autosave_now() for _ in range(3))
        told = texts(warnings)
        assert len(told) == 1 and "Unsaved work cannot be kept safe" in told[0]
        assert "keeps trying" in told[0] and "the disk is full" in told[0] and notice.label.isVisible()
        window.statusBar().grab().save(os.path.join(_artifacts(), "autosave_failing_status.png"))
        monkeypatch.setattr(core_project, "save", real_save)
        assert saver.autosave_now()
        assert not notice.label.isVisible() and "works again" in window.statusBar().currentMessage()
        assert len(texts(warnings)) == 1
    finally:
        saver.finish()


def test_autosave_that_cannot_start_writing_keeps_trying(qtbot, window, tmp_path, monkeypatch, warnings):
    def full(self, saved_at):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(recovery.Autosaver, "_write_meta", full)
    saver = recovery.Autosaver(window.session, parent=window, directory=tmp_path, interval_ms=60_000)
    try:
        file_guard.AutosaveNotice(window, saver)
        assert len(texts(warnings)) == 1 and "autosave failed (the disk is full)" in texts(warnings)[0]
    finally:
        saver.finish()


STARTUP_DRIVER = r"""
import builtins, os, sys
if sys.argv[1:] == ["deny"]:  # an unwritable folder (root ignores permission bits, so refuse here)
    data = os.environ["ORBITDESK_DATA_DIR"]
    def refuse(path):
        raise PermissionError(13, "Permission denied", os.fspath(path))
    def guard(real, writes):
        def call(path, *args, **kwargs):
            if isinstance(path, (str, os.PathLike)) and os.fspath(path).startswith(data) and writes(args, kwargs):
                refuse(path)
            return real(path, *args, **kwargs)
        return call
    os.mkdir = guard(os.mkdir, lambda a, k: True)
    os.open = guard(os.open, lambda a, k: (a[0] if a else k.get("flags", 0)) & (os.O_WRONLY | os.O_RDWR))
    builtins.open = guard(builtins.open, lambda a, k: any(c in (a[0] if a else k.get("mode", "r")) for c in "wax+"))
from PySide6.QtCore import QTimer
from orbitdesk.app import launch as app
qapp, win = app.create(["orbitdesk"])
print("STARTED", win.autosaver is None, repr(win.statusBar().currentMessage()), flush=True)
QTimer.singleShot(0, win.close)
qapp.exec()
app.finish(win)
print("CLEAN EXIT", flush=True)
"""


@pytest.mark.parametrize("where", ["a file", "under a file", "unwritable"])
def test_app_starts_when_its_data_folder_is_unusable(tmp_path, where):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a regular file where the data folder should be")
    data = {"a file": blocker, "under a file": blocker / "orbitdesk", "unwritable": tmp_path / "locked"}[where]
    if where == "unwritable":
        data.mkdir(mode=0o500)
    home = tmp_path / "home"
    home.mkdir()
    args = ["deny"] if where == "unwritable" else []
    proc = subprocess.run([sys.executable, "-c", STARTUP_DRIVER, *args],
                          env=child_env(home, ORBITDESK_DATA_DIR=str(data)), capture_output=True, text=True,
                          timeout=180)
    assert "Traceback" not in proc.stderr, proc.stderr
    assert proc.returncode == 0 and "CLEAN EXIT" in proc.stdout
    started = next(line for line in proc.stdout.splitlines() if line.startswith("STARTED"))
    assert started.startswith("STARTED True") and "cannot use its data folder" in started
    assert "runs without autosave" in proc.stderr
    assert ("no permission to write there" if where == "unwritable" else "a file is in the way") in started


# ---------------------------------------------------------------- how the new dialogs look

def _artifacts():
    path = os.path.join(os.path.dirname(__file__), "..", "..", "test-artifacts")
    os.makedirs(path, exist_ok=True)
    return os.path.abspath(path)


def test_screenshots_of_the_new_dialogs(qtbot, window, changed_behind, artifacts):
    with pytest.raises(core_project.ProjectConflict) as info:
        window.session.save(changed_behind)
    e = info.value
    ro = core_project.ProjectReadOnly(str(changed_behind))
    twice = [open_markers.OpenElsewhere(4321, "lab-pc", 1.8e9, False, True)]
    for name, question in [("conflict", file_guard.conflict_question(e)),
                           ("read_only", file_guard.read_only_question(ro)),
                           ("open_twice", file_guard.open_twice_question(changed_behind, twice))]:
        box, answers = file_guard.choice_box(window, *question)
        assert sorted(answers.values()) == sorted(c[0] for c in question[3])
        box.show()
        qtbot.waitExposed(box)
        assert box.grab().save(os.path.join(artifacts, f"file_guard_{name}.png"))
        box.close()
    box = message_box(window, "warning", *file_guard.autosave_warning(
        "Unsaved work cannot be kept safe: autosave failed (the disk is full).\n"
        "Autosave folder: /home/ana/.local/share/OrbitDesk/autosave"))
    box.show()
    qtbot.waitExposed(box)
    assert box.grab().save(os.path.join(artifacts, "file_guard_autosave.png"))
    box.close()
    dialog = file_guard.CompareDialog(window.session.to_project(), core_project.load(changed_behind),
                                      when=file_guard._when(e.current), parent=window)
    dialog.show()
    qtbot.waitExposed(dialog)
    assert dialog.grab().save(os.path.join(artifacts, "file_guard_compare.png"))
    dialog.close()


def test_restored_work_still_checks_the_original_for_changes(qtbot, window, tmp_path, answers):
    """A session crashed with unsaved edits on a file; the file was changed by someone else before the
    work was restored. Saving the restored work must ask, not overwrite."""
    path = tmp_path / "spring.orbitdesk"
    core_project.save(path, project(2.0))
    assert window.open_path(path)
    saver = recovery.Autosaver(window.session, parent=window, directory=tmp_path / "autosave", interval_ms=60_000)
    window.session.set_param("w", 3.0)
    assert saver.autosave_now()
    saver.lock.release(remove=False)  # as if the process had died
    core_project.save(path, project(1.0))  # edited elsewhere meanwhile
    from orbitdesk.app.main_window import MainWindow

    restarted = MainWindow()  # the next start of the app
    qtbot.addWidget(restarted)
    recovery.set_auto_answer(recovery.RESTORE)
    try:
        assert recovery.offer_recovery(restarted, tmp_path / "autosave")
        s = restarted.session
        assert s.path == path and s.params["w"] == 3.0 and s.dirty
        answers.queue = [file_guard.CANCEL]
        assert not restarted.save()
        assert answers.titles == ["File changed on disk"] and w_on_disk(path) == 1.0
    finally:
        recovery.set_auto_answer(None)
        restarted.session.doc.mark_saved()
        restarted.close()
        saver.finish()
