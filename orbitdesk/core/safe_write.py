"""Writing a file so that it is either the complete new content or untouched.

``write_atomically(path, content)`` writes into a temporary file in the same folder, whose name
carries 16 random hex digits and which is created exclusively (``O_CREAT | O_EXCL``: never an
existing file or a planted link), flushes it to disk and renames it over ``path``. If anything fails
on the way (a full disk, an unwritable folder, an exception from the code producing the content) the
temporary file is removed and ``path`` keeps its old content, or stays absent; the error is raised.

Used by the CSV exports, the other exports and the private compiled-code cache.
"""

from __future__ import annotations

import io
import os
import secrets
from contextlib import suppress
from typing import Callable, TextIO, Union

Content = Union[bytes, str, Callable[[TextIO], None]]


def scratch_name(target: str) -> str:
    """An unpredictable hidden name beside ``target`` for its temporary file."""
    directory, name = os.path.split(target)
    return os.path.join(directory, f".{name[:100]}.{secrets.token_hex(8)}.tmp")


def write_atomically(path, content: Content, *, mode: int = 0o666, chmod: int | None = None,
                     encoding: str = "utf-8", newline: str | None = "") -> None:
    """Replace ``path`` by ``content`` (bytes, text, or a function writing text into a handle).

    ``mode`` is the permission of a new file before the umask (0o600 for private files); ``chmod``
    sets exact permissions instead (to keep those of the file being replaced). Text is written with
    ``encoding`` and ``newline`` as ``open()`` takes them (``""``: no translation)."""
    target = os.fspath(path)
    directory = os.path.dirname(target) or "."
    tmp = scratch_name(target)
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
                 | getattr(os, "O_NOFOLLOW", 0), mode)
    try:
        with os.fdopen(fd, "wb") as raw:
            if isinstance(content, bytes):
                raw.write(content)
            else:
                handle = io.TextIOWrapper(raw, encoding=encoding, newline=newline)
                if isinstance(content, str):
                    handle.write(content)
                else:
                    content(handle)
                handle.flush()
            raw.flush()
            if chmod is not None:
                os.chmod(tmp, chmod)
            os.fsync(raw.fileno())
        os.replace(tmp, target)
    except BaseException:
        with suppress(OSError):
            os.unlink(tmp)
        raise
    if os.name != "nt":  # the rename itself on disk (a directory cannot be opened for fsync on Windows)
        dfd = os.open(directory, os.O_RDONLY)
        try:
            os.fsync(dfd)
        finally:
            os.close(dfd)


__all__ = ["scratch_name", "write_atomically"]
