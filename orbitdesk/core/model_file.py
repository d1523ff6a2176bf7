"""Reading model text files: strict UTF-8, bounded size."""

from __future__ import annotations

from pathlib import Path

MAX_MODEL_FILE_BYTES = 2_000_000


def read_model_file(path) -> str:
    """The text of a model file; ValueError with a plain message when it is too large or not UTF-8 text."""
    path = Path(path)
    size = path.stat().st_size
    if size > MAX_MODEL_FILE_BYTES:
        raise ValueError(f"the file is {size:,} bytes; model files are limited to {MAX_MODEL_FILE_BYTES:,} bytes")
    data = path.read_bytes()
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data[:err.start].count(b"\n") + 1
        raise ValueError(f"the file is not UTF-8 text (invalid byte at line {line})") from None
    if "\x00" in text:
        raise ValueError("the file contains NUL bytes; it is not a model text file")
    return text
