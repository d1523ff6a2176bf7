"""Careful writing of a user's document file: what the file was when it was read, atomic replacement,
hard links, read-only files, and the temporary files an interrupted save leaves behind.

- ``DiskState`` (modification time in ns, size, SHA-256 of the content) records a file as it was read
  or written; ``current_state(path)`` reads it again so a writer can tell that someone else changed it.
- ``atomic_write`` writes a temporary file in the same folder, fsyncs it, renames it over the target
  and fsyncs the folder. Temporary files are named ``.NAME.HOST-PID-RANDOM.tmp`` (hidden, our own
  pattern) so that ``remove_stale_temps`` can tell which ones were left by a save that was killed:
  those of a dead process on this host, and any of ours older than ``STALE_AGE`` seconds.
- ``write_in_place`` rewrites a hard-linked file through its existing inode (the links stay joined).

No Qt here; project.py builds the project document's save on these.
"""

from __future__ import annotations

import errno
import hashlib
import os
import re
import secrets
import socket
import stat
import time
from contextlib import suppress
from dataclasses import dataclass

from orbitdesk.language.model_file import open_regular

STALE_AGE = 3600.0      # seconds: a temporary file whose owner cannot be checked is stale after this
_CHUNK = 1 << 20


def _host_tag() -> str:
    try:
        host = socket.gethostname()
    except OSError:
        host = ""
    return hashlib.sha256(host.encode("utf-8", "replace")).hexdigest()[:8]


HOST_TAG = _host_tag()


@dataclass(frozen=True)
class DiskState:
    """A file as it was seen: modification time (ns), size in bytes and SHA-256 of its content."""

    mtime_ns: int
    size: int
    digest: str

    def same_content(self, other: "DiskState | None") -> bool:
        return other is not None and self.size == other.size and self.digest == other.digest

    @property
    def modified(self) -> float:
        return self.mtime_ns / 1e9

    def to_json(self) -> dict:
        return {"mtime_ns": self.mtime_ns, "size": self.size, "sha256": self.digest}

    @classmethod
    def from_json(cls, d) -> "DiskState | None":
        """The state written by ``to_json`` (None for anything else: it is read from a file)."""
        if not isinstance(d, dict):
            return None
        mtime, size, digest = d.get("mtime_ns"), d.get("size"), d.get("sha256")
        if not (type(mtime) is int and type(size) is int and size >= 0 and isinstance(digest, str)
                and re.fullmatch(r"[0-9a-f]{64}", digest)):
            return None
        return cls(mtime, size, digest)


def state_of(data: bytes, st: os.stat_result) -> DiskState:
    """The state of a file whose bytes ``data`` were read from an open file with ``fstat`` result ``st``."""
    return DiskState(st.st_mtime_ns, len(data), hashlib.sha256(data).hexdigest())


def current_state(path) -> DiskState | None:
    """The file's state now (None if there is no file); reads the whole file to hash it.

    Raises OSError if it cannot be read, ValueError if it is not a regular file (never blocks on a FIFO).
    """
    try:
        fd, st = open_regular(path)
    except FileNotFoundError:
        return None
    try:
        h, size = hashlib.sha256(), 0
        while chunk := os.read(fd, _CHUNK):
            h.update(chunk)
            size += len(chunk)
        return DiskState(st.st_mtime_ns, size, h.hexdigest())
    finally:
        os.close(fd)


def is_read_only(path, st: os.stat_result | None = None) -> bool:
    """True if the file is marked read-only: no write bit at all, or not writable by this user.
    (The permission bits count even for an administrator, who the system would let write anyway.)"""
    st = st if st is not None else os.stat(path)
    if not st.st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH):
        return True
    return not os.access(path, os.W_OK)


def plain_reason(e: BaseException) -> str:
    """An operating-system error in plain words (for messages about files and folders)."""
    cause = e if isinstance(e, OSError) else e.__cause__
    code = getattr(cause, "errno", None)
    words = {errno.ENOSPC: "the disk is full", getattr(errno, "EDQUOT", -1): "the disk quota is used up",
             errno.EACCES: "no permission to write there", errno.EPERM: "no permission to write there",
             errno.EROFS: "the disk is read-only", errno.EEXIST: "a file is in the way where a folder should be",
             errno.ENOTDIR: "a file is in the way where a folder should be"}
    if code in words:
        return words[code]
    return getattr(cause, "strerror", None) or getattr(e, "message", None) or str(e)


# ---------------------------------------------------------------- temporary files

def _stem(base: str) -> str:
    """The file name cut to at most 100 bytes, so the temporary name stays within the 255-byte limit
    whatever the script of the name."""
    return os.fsdecode(os.fsencode(base)[:100])


def temp_name(target: str) -> str:
    """A fresh temporary file name beside ``target`` in our own pattern (host, pid, random)."""
    directory, base = os.path.split(target)
    return os.path.join(directory, f".{_stem(base)}.{HOST_TAG}-{os.getpid()}-{secrets.token_hex(6)}.tmp")


def _temp_pattern(base: str) -> re.Pattern:
    # Also matches ``.NAME.RANDOM.tmp`` (earlier versions: no owner, judged by age; the name cut at 100
    # characters).
    stems = "|".join(re.escape(s) for s in {_stem(base), base[:100]})
    return re.compile(r"\.(?:" + stems + r")\.(?:([0-9a-f]{8})-([0-9]{1,10})-)?[0-9a-f]{12}\.tmp")


def pid_alive(pid: int) -> bool:
    """Whether process ``pid`` exists on this machine (True when that cannot be told)."""
    if pid <= 0:
        return False
    if pid == os.getpid():
        return True
    if os.name == "nt":  # os.kill(pid, 0) would send CTRL_C_EVENT there
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # PermissionError: alive, owned by someone else
        return True
    return True


def stale_temps(target, now: float | None = None) -> list[str]:
    """Temporary files beside ``target`` (and its ``.bak``) left by saves that cannot finish any more."""
    target = os.fspath(target)
    directory, base = os.path.split(target)
    patterns = [_temp_pattern(base), _temp_pattern(base + ".bak")]
    now = time.time() if now is None else now
    found = []
    try:
        entries = list(os.scandir(directory or "."))
    except OSError:
        return []
    for entry in entries:
        match = next((m for p in patterns if (m := p.fullmatch(entry.name))), None)
        if match is None:
            continue
        try:
            st = entry.stat(follow_symlinks=False)
        except OSError:
            continue
        if stat.S_ISDIR(st.st_mode):
            continue
        host, pid = match.group(1), match.group(2)
        if host == HOST_TAG and pid is not None:
            stale = not pid_alive(int(pid))
        else:
            stale = now - st.st_mtime > STALE_AGE
        if stale:
            found.append(entry.path)
    return sorted(found)


def remove_stale_temps(target) -> list[str]:
    """Delete what ``stale_temps`` finds; returns the paths removed. Never raises for a file it cannot remove."""
    removed = []
    for path in stale_temps(target):
        with suppress(OSError):
            os.unlink(path)
            removed.append(path)
    return removed


# ---------------------------------------------------------------- writing

def _fsync_dir(directory: str) -> None:
    if os.name == "nt":  # directories cannot be opened for fsync on Windows
        return
    dfd = os.open(directory, os.O_RDONLY)
    try:
        os.fsync(dfd)
    finally:
        os.close(dfd)


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        view = view[n:]


def atomic_write(target: str, data: bytes, mode: int | None) -> None:
    """Replace ``target`` by ``data``: temporary file in the same folder, fsync, rename, fsync the folder.
    ``mode`` (permission bits) is given to the new file. On failure the old file is untouched."""
    directory = os.path.dirname(target) or "."
    tmp = temp_name(target)
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            if mode is not None:
                os.chmod(tmp, mode)
            os.fsync(f.fileno())
        os.replace(tmp, target)
    except BaseException:
        with suppress(OSError):
            os.unlink(tmp)
        raise
    _fsync_dir(directory)


def write_in_place(target: str, data: bytes) -> None:
    """Rewrite ``target`` through its own inode, so every hard link to it sees the new content.

    Space is reserved before the first byte changes (a full disk fails with the file intact); a crash
    in the middle can leave a partial file, so callers write a backup copy first.
    """
    fd = os.open(target, os.O_WRONLY | getattr(os, "O_BINARY", 0))
    try:
        old_size = os.fstat(fd).st_size
        if len(data) > old_size and hasattr(os, "posix_fallocate"):
            try:
                os.posix_fallocate(fd, 0, len(data))
            except OSError as e:
                with suppress(OSError):
                    os.ftruncate(fd, old_size)
                if e.errno not in (errno.EOPNOTSUPP, errno.EINVAL, errno.ENOSYS):  # unsupported: go on without
                    raise
        os.lseek(fd, 0, os.SEEK_SET)
        _write_all(fd, data)
        os.ftruncate(fd, len(data))
        os.fsync(fd)
    finally:
        os.close(fd)
