"""Which project files are open, and where: one small marker file per open document in a folder of the
user's own data folder (never in the project's folder).

A marker ``KEY.HOST-PID-TOKEN.json`` (KEY: hash of the file's real path) holds the path, the process id,
the host name and when it was opened. ``others(folder, path)`` lists the markers of other windows on the
same file, skipping (and removing) stale ones: a dead process on this host, or a window of this process
that no longer holds its marker. Markers from other hosts cannot be checked; they are believed for
``FOREIGN_AGE`` seconds.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import socket
import time
from contextlib import suppress
from dataclasses import dataclass
from pathlib import Path

from orbitdesk.document.safe_files import HOST_TAG, pid_alive
from orbitdesk.language.model_file import read_regular

FOREIGN_AGE = 7 * 24 * 3600.0
_live_tokens: set[str] = set()   # markers held by windows of this process


def _key(path) -> str:
    real = os.path.realpath(os.fspath(path))
    return hashlib.sha256(real.encode("utf-8", "surrogateescape")).hexdigest()[:32]


@dataclass
class OpenElsewhere:
    """Another window that has the file open."""

    pid: int
    host: str
    opened_at: float
    this_process: bool
    this_host: bool

    def describe(self) -> str:
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(self.opened_at)) if self.opened_at else "earlier"
        if self.this_process:
            return f"another window of this OrbitDesk (opened {when})"
        where = "this computer" if self.this_host else (self.host or "another computer")
        return f"OrbitDesk process {self.pid} on {where} (opened {when})"


class Marker:
    """This window's marker for one open file; ``release()`` removes it."""

    def __init__(self, folder: Path, path):
        self.folder = Path(folder)
        self.path = os.path.realpath(os.fspath(path))
        self.token = secrets.token_hex(6)
        self.file = self.folder / f"{_key(path)}.{HOST_TAG}-{os.getpid()}-{self.token}.json"
        self.folder.mkdir(parents=True, exist_ok=True)
        try:
            host = socket.gethostname()
        except OSError:
            host = ""
        data = {"path": self.path, "pid": os.getpid(), "host": host, "opened_at": time.time()}
        tmp = self.file.with_suffix(".part")
        tmp.write_text(json.dumps(data), encoding="utf-8")
        os.replace(tmp, self.file)
        _live_tokens.add(self.token)

    def release(self) -> None:
        _live_tokens.discard(self.token)
        with suppress(OSError):
            os.unlink(self.file)


def claim(folder, path) -> Marker:
    """Mark ``path`` as open in this window (raises OSError if the marker cannot be written)."""
    return Marker(folder, path)


def others(folder, path, mine: Marker | None = None, now: float | None = None) -> list[OpenElsewhere]:
    """Live markers on the same file other than ``mine``; stale markers on this host are removed."""
    folder = Path(folder)
    now = time.time() if now is None else now
    prefix = _key(path) + "."
    found = []
    try:
        entries = [e for e in os.scandir(folder) if e.name.startswith(prefix) and e.name.endswith(".json")]
    except OSError:
        return []
    for entry in entries:
        owner = entry.name[len(prefix):-len(".json")]
        parts = owner.split("-")
        if len(parts) != 3 or not parts[1].isdigit():
            continue
        host_tag, pid, token = parts[0], int(parts[1]), parts[2]
        if mine is not None and token == mine.token:
            continue
        this_host = host_tag == HOST_TAG
        this_process = this_host and pid == os.getpid()
        if (this_process and token not in _live_tokens) or (this_host and not pid_alive(pid)):
            with suppress(OSError):
                os.unlink(entry.path)
            continue
        try:
            data = json.loads(read_regular(entry.path, 100_000)[0].decode("utf-8"))  # never blocks on a FIFO
            opened_at = float(data.get("opened_at") or 0.0)
            host = str(data.get("host") or "")[:200]
        except (OSError, ValueError, TypeError, AttributeError):
            opened_at, host = 0.0, ""
        if not this_host and now - opened_at > FOREIGN_AGE:
            continue
        found.append(OpenElsewhere(pid, host, opened_at, this_process, this_host))
    return sorted(found, key=lambda o: o.opened_at)
