"""Reading model text files: strict UTF-8, bounded size."""

from __future__ import annotations

import codecs
import os
import stat
from pathlib import Path

MAX_MODEL_FILE_BYTES = 2_000_000


def read_model_file(path) -> str:
    """The text of a model file; ValueError with a plain message when it is too large or not UTF-8 text.

    Only regular files are read (a FIFO, a device such as /dev/zero, a socket or a folder is refused
    before it is opened), and at most ``MAX_MODEL_FILE_BYTES + 1`` bytes, so a file that grows cannot
    make reading run without end.
    """
    path = Path(path)
    size = path.stat().st_size
    if size > MAX_MODEL_FILE_BYTES:
        raise ValueError(f"the file is {size:,} bytes; model files are limited to {MAX_MODEL_FILE_BYTES:,} bytes")
    data = read_regular(path, MAX_MODEL_FILE_BYTES)[0]  # a FIFO or device is refused, never opened blocking
    if len(data) > MAX_MODEL_FILE_BYTES:
        raise ValueError(f"the file is larger than {MAX_MODEL_FILE_BYTES:,} bytes, the limit for model files")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        start = err.start + (len(codecs.BOM_UTF8) if data.startswith(codecs.BOM_UTF8) else 0)
        line = data.count(b"\n", 0, start) + 1
        column = start - (data.rfind(b"\n", 0, start) + 1) + 1
        raise ValueError(f"the file is not UTF-8 text (invalid byte 0x{data[start]:02x} at line {line}, "
                         f"byte {column} of the line)") from None
    if "\x00" in text:
        line = text.count("\n", 0, text.index("\x00")) + 1
        raise ValueError(f"the file contains NUL bytes (first at line {line}); it is not a model text file")
    return text


def open_regular(path) -> tuple[int, os.stat_result]:
    """An open descriptor of a regular file and its fstat. A FIFO, device, socket or folder is refused
    with ValueError before it is opened (a FIFO would block in open(), a device may act on open); the
    file is opened non-blocking and checked again, so one swapped in between is refused too.
    OSError (FileNotFoundError, ...) when it cannot be read. Every path the program reads goes
    through here or ``read_regular``."""
    path = os.fspath(path)
    mode = os.stat(path).st_mode
    if not stat.S_ISREG(mode):
        raise ValueError(f"{_kind(mode)}, not a regular file")
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    st = os.fstat(fd)
    if not stat.S_ISREG(st.st_mode):
        os.close(fd)
        raise ValueError(f"{_kind(st.st_mode)}, not a regular file")
    return fd, st


def read_regular(path, max_bytes: int) -> tuple[bytes, os.stat_result]:
    """At most ``max_bytes + 1`` bytes of a regular file (``open_regular``) and its fstat."""
    fd, st = open_regular(path)
    with os.fdopen(fd, "rb") as handle:
        return handle.read(max_bytes + 1), st


def _kind(mode: int) -> str:
    for test, name in ((stat.S_ISFIFO, "a pipe (FIFO)"), (stat.S_ISDIR, "a folder"), (stat.S_ISSOCK, "a socket"),
                       (stat.S_ISCHR, "a device"), (stat.S_ISBLK, "a device")):
        if test(mode):
            return f"this is {name}"
    return "this is a special file"
