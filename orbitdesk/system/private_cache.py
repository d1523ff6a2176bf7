"""A per-user cache folder for generated code that nobody else can write, and loading from it safely.

Generated Python modules (and numba's own cache files, which are pickles) are only ever kept in a
folder that this user owns and that nobody else can write to:

* ``private_folder("jit")`` creates ``<cache root>/jit`` with mode 0700 and checks, with ``lstat``,
  the root and every folder under it: each must be a folder (not a symbolic link) owned by this
  user and not writable by group or others; the root's parent must not let anybody else replace
  the root (owned by us or root; writable by others only with the sticky bit, like /tmp). A folder
  that fails is refused: a message once (logged as a warning, also kept in ``problems()``), and
  ``None``, which callers take as "no disk cache": nothing crashes.
* ``load_source_module(folder, name, source)`` writes ``source`` to ``<folder>/<name>.py`` (a
  temporary file with an unpredictable name, created exclusively, renamed into place), reads the
  file back, checks that its SHA-256 equals the hash of ``source``, and compiles *that text* with
  ``compile()`` into a fresh module. Python's import system is never used on the folder, so a
  ``.pyc`` found there (even one carrying the ``.py``'s time and size) is never executed. With no
  folder, the module is compiled from ``source`` without touching the disk.

The cache root is ``$ORBITDESK_CACHE`` if set, else ``$XDG_CACHE_HOME/orbitdesk`` (``~/.cache``).
"""

from __future__ import annotations

import hashlib
import logging
import os
import stat
import sys
import threading
import types
from pathlib import Path

from orbitdesk.document.safe_files import atomic_write

log = logging.getLogger("orbitdesk.cache")
_lock = threading.Lock()
_reported: dict[str, str] = {}


def cache_root() -> Path:
    base = os.environ.get("ORBITDESK_CACHE") or os.path.join(
        os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache"), "orbitdesk")
    return Path(os.path.abspath(base))


def _refuse(folder: Path, why: str) -> None:
    key = str(folder)
    with _lock:
        if key in _reported:
            return
        message = (f"the cache folder {folder} is not used ({why}); compiled code is kept in memory only. "
                   "Remove the folder or fix its owner and permissions, or set ORBITDESK_CACHE to another folder.")
        _reported[key] = message
    log.warning("%s", message)


def problems() -> list[str]:
    """The messages given so far about refused cache folders (each folder once)."""
    with _lock:
        return list(_reported.values())


def _problem(path: Path, st: os.stat_result, ours: bool) -> str | None:
    """Why ``path`` is not safe to keep our code in (``ours``: a folder of the cache), or None."""
    uid = os.getuid()
    if stat.S_ISLNK(st.st_mode):
        return f"{path} is a symbolic link"
    if not stat.S_ISDIR(st.st_mode):
        return f"{path} is not a folder"
    if st.st_uid != uid and (ours or st.st_uid != 0):
        return f"{path} belongs to another user (uid {st.st_uid})"
    if st.st_mode & (stat.S_IWGRP | stat.S_IWOTH) and (ours or not st.st_mode & stat.S_ISVTX):
        return f"{path} can be written by other users (mode {stat.S_IMODE(st.st_mode):o})"
    return None


def private_folder(*parts: str, create: bool = True) -> Path | None:
    """``<cache root>/<parts...>``, created private (0700) and verified; None when refused or absent."""
    root = cache_root()
    folder = root.joinpath(*parts)
    if not hasattr(os, "getuid"):  # Windows: per-user profile folders are private already
        if create:
            folder.mkdir(parents=True, exist_ok=True)
        return folder if folder.is_dir() else None
    try:
        if create and not root.parent.exists():  # a fresh account has no ~/.cache yet: made private
            root.parent.mkdir(mode=0o700, parents=True, exist_ok=True)
        # the root's parent may be shared (like /tmp, with the sticky bit) or a link (~/.cache), but
        # nobody else may be able to replace the root in it
        why = _problem(root.parent, os.stat(root.parent), ours=False)
        path = root
        for name in (None, *parts):
            if why:
                break
            path = path / name if name else path
            try:
                st = os.lstat(path)
            except FileNotFoundError:
                if not create:
                    return None
                os.mkdir(path, 0o700)
                st = os.lstat(path)
            why = _problem(path, st, ours=True)
    except OSError as err:
        why = f"cannot use it: {err.strerror or err}"
    if why:
        _refuse(folder, why)
        return None
    return folder


def source_hash(source: str) -> str:
    return hashlib.sha256(source.encode("utf-8")).hexdigest()


def _read_own_file(path: Path) -> bytes | None:
    """The bytes of ``path`` if it is a regular file of ours (not a link), else None."""
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return None
    with os.fdopen(fd, "rb") as handle:
        st = os.fstat(handle.fileno())
        if not stat.S_ISREG(st.st_mode) or (hasattr(os, "getuid") and st.st_uid != os.getuid()):
            return None
        return handle.read()


def verified_source(folder: Path, name: str, source: str) -> tuple[str, str]:
    """Make ``<folder>/<name>.py`` hold ``source``; returns (the text read back and verified, its path)."""
    path = folder / f"{name}.py"
    expected = source_hash(source)
    data = _read_own_file(path)
    if data is None or hashlib.sha256(data).hexdigest() != expected:
        atomic_write(str(path), source.encode("utf-8"), 0o600)
        data = _read_own_file(path)
    if data is None or hashlib.sha256(data).hexdigest() != expected:
        raise OSError(f"{path} does not hold the code written there")
    return data.decode("utf-8"), str(path)


def load_source_module(folder: Path | None, name: str, source: str, namespace: dict | None = None,
                       module_name: str | None = None, on_disk_flag: str | None = None) -> types.ModuleType:
    """A module made from ``source`` (our generated text): kept as ``<folder>/<name>.py`` when there is
    a folder, compiled from the verified text; ``namespace`` is set in the module before it runs, and
    ``on_disk_flag`` (a global name) says whether the module is backed by its verified file (numba's
    ``cache=`` needs that file)."""
    text, filename, on_disk = source, f"<generated {name}>", False
    if folder is not None:
        try:
            text, filename = verified_source(folder, name, source)
            on_disk = True
        except OSError as err:
            _refuse(folder, f"cannot keep code there: {err.strerror or err}")
    module = types.ModuleType(module_name or name)
    module.__file__ = filename
    module.__dict__.update(namespace or {})
    if on_disk_flag:
        module.__dict__[on_disk_flag] = on_disk
    sys.modules[module.__name__] = module
    code = compile(text, filename, "exec", dont_inherit=True)  # our printed text, verified by its hash
    exec(code, module.__dict__)  # noqa: S102  (text generated by us from compiled model trees)
    return module


__all__ = ["cache_root", "load_source_module", "private_folder", "problems", "source_hash", "verified_source"]
