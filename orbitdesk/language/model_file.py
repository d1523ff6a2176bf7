"""Reading model text files: strict UTF-8, bounded size."""

from __future__ import annotations

import codecs
from pathlib import Path

MAX_MODEL_FILE_BYTES = 2_000_000


def read_model_file(path) -> str:
    """The text of a model file; ValueError with a plain message when it is too large or not UTF-8 text.

    At most ``MAX_MODEL_FILE_BYTES + 1`` bytes are ever read, so a file that grows, a device such
    as /dev/zero or a pipe cannot make reading run without end.
    """
    path = Path(path)
    size = path.stat().st_size
    if size > MAX_MODEL_FILE_BYTES:
        raise ValueError(f"the file is {size:,} bytes; model files are limited to {MAX_MODEL_FILE_BYTES:,} bytes")
    with open(path, "rb") as handle:
        data = handle.read(MAX_MODEL_FILE_BYTES + 1)
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
