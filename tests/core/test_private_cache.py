"""The compiled-code cache is private and nothing found in it runs unless it is our own verified text
(issue 10, item 2): the folder is created 0700; a folder others could write or that belongs to
someone else is refused with one message and the work still runs; generated modules are compiled
from their source text checked against its hash, so a planted ``.pyc`` (with the ``.py``'s time and
size) or a replaced ``.py`` never runs; temporary files are never predictable names."""

from __future__ import annotations

import importlib.util
import logging
import marshal
import os
import stat
import sys

import numpy as np
import pytest

from orbitdesk.system import private_cache
from orbitdesk.engine import compiled
from orbitdesk.engine.ensembles import rk4_ensemble
from orbitdesk.document.safe_files import atomic_write, temp_name
from orbitdesk.system.compiled_system import compile_model

OSCILLATOR = "w = 1.5\nx'' = -w^2*x\nx(0) = 1\n"
MARKER_CODE = "open({marker!r}, 'w').close()\n"
needs_numba = pytest.mark.skipif(not compiled.available(), reason="numba missing or ORBITDESK_NO_JIT set")
posix = pytest.mark.skipif(not hasattr(os, "getuid"), reason="POSIX owners and modes")


@pytest.fixture
def cache(tmp_path, monkeypatch):
    root = tmp_path / "cache"
    monkeypatch.setenv("ORBITDESK_CACHE", str(root))
    monkeypatch.setattr(compiled, "_engines", {})
    return root


def _mode(path) -> int:
    return stat.S_IMODE(os.lstat(path).st_mode)


def _rk4_works(system) -> None:
    """One compiled RK4 ensemble against the plain-Python path (the same loop)."""
    U = np.array([[1.0, 0.5], [0.0, 0.2]])
    compiled = rk4_ensemble(system, U.copy(), dt=0.01, n_steps=20, compiled=True)
    reference = rk4_ensemble(system, U.copy(), dt=0.01, n_steps=20, compiled=False)
    assert np.allclose(compiled.states, reference.states, rtol=1e-12, atol=1e-14)


@posix
def test_the_cache_folder_is_created_private(cache):
    folder = private_cache.private_folder("jit")
    assert folder == cache / "jit"
    assert _mode(cache) == 0o700 and _mode(folder) == 0o700


@posix
def test_a_fresh_account_without_a_cache_home_gets_one(tmp_path, monkeypatch, caplog):
    # a new user (or a new machine) has no ~/.cache: the folders are made, private, not refused
    monkeypatch.delenv("ORBITDESK_CACHE", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "home" / ".cache"))
    with caplog.at_level(logging.WARNING):
        folder = private_cache.private_folder("kernels")
    assert folder == tmp_path / "home" / ".cache" / "orbitdesk" / "kernels" and folder.is_dir()
    assert _mode(tmp_path / "home" / ".cache") == 0o700 and _mode(folder) == 0o700
    assert "not used" not in caplog.text


@posix
@needs_numba
def test_numba_cache_files_stay_in_the_private_folder(cache, monkeypatch, tmp_path):
    import numba

    elsewhere = tmp_path / "numba-elsewhere"
    system = compile_model(OSCILLATOR)
    _rk4_works(system)
    assert _mode(cache / "kernels") == 0o700 and _mode(cache / "kernels" / "__pycache__") == 0o700
    assert list((cache / "kernels" / "__pycache__").glob("m*.nbi"))
    assert compiled.is_compiled(system)
    # numba told to cache in a folder of its own: our code is then not cached on disk at all
    monkeypatch.setattr(numba.config, "CACHE_DIR", str(elsewhere))
    monkeypatch.setattr(compiled, "_engines", {})
    _rk4_works(compile_model("w = 1.5\nx'' = -w^2*x - 0.1*x'\nx(0) = 1\n"))
    assert not elsewhere.exists()


@posix
@pytest.mark.parametrize("mode", [0o777, 0o775, 0o722])
def test_a_folder_others_can_write_is_refused_once_and_the_run_still_works(cache, caplog, mode):
    (cache / "kernels").mkdir(parents=True)
    os.chmod(cache / "kernels", mode)
    with caplog.at_level(logging.WARNING, logger="orbitdesk.cache"):
        assert private_cache.private_folder("kernels") is None
        assert private_cache.private_folder("kernels") is None
    refusals = [r.getMessage() for r in caplog.records if "is not used" in r.getMessage()]
    assert len(refusals) == 1 and "written by other users" in refusals[0]
    assert any(str(cache / "kernels") in m for m in private_cache.problems())
    if compiled.available():
        _rk4_works(compile_model(OSCILLATOR))
        assert list((cache / "kernels").iterdir()) == []  # nothing was written into the refused folder


@posix
def test_a_folder_of_another_user_is_refused(cache, monkeypatch, caplog):
    victim = cache / "kernels"
    victim.mkdir(parents=True, mode=0o700)
    real_lstat = os.lstat

    def lstat(path, *args, **kwargs):  # as if another user had made the folder (cannot chown here)
        st = real_lstat(path, *args, **kwargs)
        if os.fspath(path) == os.fspath(victim):
            fields = list(st)
            fields[stat.ST_UID] = os.getuid() + 4242
            return os.stat_result(fields)
        return st

    monkeypatch.setattr(os, "lstat", lstat)
    with caplog.at_level(logging.WARNING, logger="orbitdesk.cache"):
        assert private_cache.private_folder("kernels") is None
    assert "belongs to another user" in caplog.text
    if compiled.available():
        _rk4_works(compile_model(OSCILLATOR))


@posix
def test_a_symbolic_link_in_the_cache_is_refused(cache, tmp_path):
    cache.mkdir(mode=0o700)
    (tmp_path / "somewhere").mkdir(mode=0o700)
    os.symlink(tmp_path / "somewhere", cache / "jit")
    assert private_cache.private_folder("jit") is None


@posix
def test_a_root_in_a_folder_others_can_write_is_refused(tmp_path, monkeypatch):
    shared = tmp_path / "shared"
    shared.mkdir()
    os.chmod(shared, 0o777)  # no sticky bit: anybody could replace our root
    monkeypatch.setenv("ORBITDESK_CACHE", str(shared / "cache"))
    assert private_cache.private_folder("jit") is None
    os.chmod(shared, 0o1777)  # like /tmp
    assert private_cache.private_folder("jit") == shared / "cache" / "jit"


def _plant_pyc(source_path, code_text, pyc_path) -> None:
    """Bytecode for ``code_text`` stamped with the ``.py``'s time and size, as Python's import checks it."""
    st = os.stat(source_path)
    header = (importlib.util.MAGIC_NUMBER + (0).to_bytes(4, "little")
              + (int(st.st_mtime) & 0xFFFFFFFF).to_bytes(4, "little") + (st.st_size & 0xFFFFFFFF).to_bytes(4, "little"))
    pyc_path.parent.mkdir(exist_ok=True, mode=0o700)
    pyc_path.write_bytes(header + marshal.dumps(compile(code_text, str(source_path), "exec")))


@posix
@needs_numba
def test_a_planted_pyc_is_never_executed(cache, tmp_path):
    system = compile_model(OSCILLATOR)
    source = compiled.module_source(system, jit=True)
    key = compiled._digest(source)
    folder = private_cache.private_folder("kernels")
    atomic_write(str(folder / f"m{key}.py"), source.encode(), 0o600)
    marker = tmp_path / "pwned"
    payload = MARKER_CODE.format(marker=str(marker))
    tag = sys.implementation.cache_tag
    _plant_pyc(folder / f"m{key}.py", payload, folder / "__pycache__" / f"m{key}.{tag}.pyc")
    _plant_pyc(folder / f"m{key}.py", payload, folder / f"m{key}.pyc")
    _rk4_works(system)
    assert not marker.exists()


@posix
def test_a_replaced_source_file_is_rewritten_not_run(cache, tmp_path):
    folder = private_cache.private_folder("jit")
    marker = tmp_path / "pwned"
    source = "VALUE = 42\n"
    (folder / "mgen.py").write_text(MARKER_CODE.format(marker=str(marker)))
    module = private_cache.load_source_module(folder, "mgen", source)
    assert module.VALUE == 42 and not marker.exists()
    assert (folder / "mgen.py").read_text() == source and _mode(folder / "mgen.py") == 0o600


@posix
def test_a_cache_that_cannot_be_written_falls_back_to_memory(cache, monkeypatch, caplog):
    def full_disk(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(private_cache, "atomic_write", full_disk)
    folder = private_cache.private_folder("jit")
    with caplog.at_level(logging.WARNING, logger="orbitdesk.cache"):
        module = private_cache.load_source_module(folder, "mfull", "VALUE = 3\n", on_disk_flag="ON_DISK")
    assert module.VALUE == 3 and module.ON_DISK is False and "No space left" in caplog.text
    if compiled.available():
        _rk4_works(compile_model(OSCILLATOR))  # numba is then told not to cache on disk


@posix
def test_temporary_files_are_unpredictable_and_exclusive(cache, tmp_path):
    folder = private_cache.private_folder("jit")
    target = folder / "mgen.py"
    names = {temp_name(str(target)) for _ in range(50)}
    assert len(names) == 50
    # a link planted at the name a process id would give is never followed
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    for guess in (target.with_suffix(f".{os.getpid()}.tmp"), folder / f".{target.name}.tmp"):
        os.symlink(victim, guess)
    private_cache.load_source_module(folder, "mgen", "VALUE = 1\n")
    assert victim.read_text() == "keep me"
    assert target.read_text() == "VALUE = 1\n" and not stat.S_ISLNK(os.lstat(target).st_mode)


def test_kernel_digest_while_another_thread_is_still_importing_numba(monkeypatch):
    # a plain-Python run that starts the compiler in the background digests the kernel's source with numba's
    # version while a view's worker thread may be half way through importing numba (seen in the app: the
    # phase plane's second paths failed with "partially initialized module 'numba' has no attribute
    # '__version__'"); the installed package's metadata gives the same version
    import types
    from importlib.metadata import version

    monkeypatch.setitem(sys.modules, "numba", types.ModuleType("numba"))  # imported, not yet initialised
    assert compiled._numba_version() == version("numba")
