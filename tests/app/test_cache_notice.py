"""A refused compiled-code cache folder is told to the user once, in the window (issue 10, item 2)."""

from __future__ import annotations

import os
import threading

from orbitdesk.system import private_cache


def test_a_refused_cache_folder_is_told_in_the_status_bar(qtbot, window, tmp_path, monkeypatch):
    root = tmp_path / "cache"
    (root / "jit").mkdir(parents=True)
    os.chmod(root / "jit", 0o777)
    monkeypatch.setenv("ORBITDESK_CACHE", str(root))
    worker = threading.Thread(target=private_cache.private_folder, args=("jit",))  # as a job would
    worker.start()
    worker.join()
    qtbot.waitUntil(lambda: "is not used" in window.statusBar().currentMessage(), timeout=5000)
    assert str(root / "jit") in window.statusBar().currentMessage()
    window.statusBar().clearMessage()
    assert private_cache.private_folder("jit") is None
    qtbot.wait(50)
    assert window.statusBar().currentMessage() == ""  # once
