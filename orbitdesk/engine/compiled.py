"""Each model's kernels (``codegen.py``) as a module: numba ``cfunc``s cached on disk, or plain
Python; paired with the loops of this package (``jitting.py``) as one ``Engine``.

* ``engine_for(system)`` gives the compiled engine when it is ready; otherwise the plain-Python one
  (same source, same results, slower). ``wait=True`` compiles now; ``prepare(system)`` compiles on
  a background thread, so the app never waits for the compiler while the Python path serves.
* The compiled kernels live in the private cache folder ``kernels`` (``private_cache.py``: 0700,
  refused when foreign or writable by others); a file is named by the hash of its text (the
  generated source, the numba version) and compiled from the text read back and checked against
  that hash. numba keeps the machine code next to it (``cache=True``), so a model compiled once
  loads quickly in later processes. Without a safe folder the kernels are compiled in memory.
* ``ORBITDESK_NO_JIT=1`` forces the plain-Python path (the fallback CI also tests); so does a
  missing numba. ``ORBITDESK_CACHE`` moves the cache folder.
"""

from __future__ import annotations

import hashlib
import math
import sys
import threading
from dataclasses import dataclass, field
from pathlib import Path
from types import ModuleType, SimpleNamespace

import numpy as np

from orbitdesk.system import float_math, private_cache
from orbitdesk.system.codegen import HEADER, kernel_source
from orbitdesk.system.compiled_system import UNDEFINED_ERRORS
from orbitdesk.engine import explicit_rk, jitting, maps, members, members_fixed, newton_starts, stochastic, tangent

LOOP_MODULES = (explicit_rk, maps, tangent, members, members_fixed, stochastic, newton_starts)
_SIGNATURES = {}  # kernels compiled as cfuncs on arrays (sde); model: inlined into model_at, on pointers


def _at_kernel(name: str) -> str:
    """The loops' entry to the kernel ``name`` (``model``, ``sensitivity``): ``{name}_at``, a cfunc on
    its arrays' data as pointers (jitting.at), made arrays again, with the kernel inlined."""
    return f"""

@cfunc(jitting.signature('MODEL_AT'), cache=_ON_DISK, error_model='numpy')
def {name}_at(which, t, z, p, out):
    size = N_STATES * (which + 1)
    {name}(which, t, carray(z, size), carray(p, N_PARAMS), carray(out, size))
"""
_CACHE_OPTION = "cache=_ON_DISK"  # private_cache sets _ON_DISK: the module is backed by its verified file
_lock = threading.Lock()
_batch_lock = threading.RLock()
_engines: dict[str, "Engine"] = {}  # source hash -> compiled engine, its loops ready
_pending: dict[str, threading.Thread] = {}


@dataclass
class Engine:
    """The loops and one model's kernels, both compiled or both plain Python."""

    loops: SimpleNamespace
    kernels: ModuleType
    compiled: bool
    batch_text: str = ""  # the compiled batched kernel's module source (compiled when first used); the
    #                       plain-Python engine's batched kernel is numpy_batch (codegen.vector_source)
    _batch: object = None
    _entries: dict = field(default_factory=dict, repr=False)
    _parts: dict = field(default_factory=dict, repr=False)  # kernels of their own modules, by name

    @property
    def f(self):
        return self.kernels.model_at

    def entry(self, name: str):
        """The loop ``name`` for repeated calls from Python (``jitting.entry``), kept per engine."""
        found = self._entries.get(name)
        if found is None:
            found = self._entries[name] = jitting.entry(getattr(self.loops, name))
        return found

    @property
    def batch(self):
        """The batched kernel (``codegen.batch_source``): its own module, compiled (or loaded from
        the cache) the first time members run, so a single run never waits for it."""
        if self._batch is None:
            with _batch_lock:
                if self._batch is None:
                    digest = _digest(self.batch_text)
                    module = (_import_compiled(self.batch_text, digest, "b") if self.compiled
                              else _exec_module(self.batch_text, f"pyb{digest}"))
                    self._batch = module.batch
        return self._batch


def sensitivity_kernel(engine: Engine, system):
    """The model's sensitivity kernel (``codegen.sensitivity_source``: ``model`` with the forcing df/dp,
    the same arguments, so the engine's loops take it in place of ``engine.f``), compiled like the
    engine's kernels (or plain Python with them) in a module of its own the first time it is asked."""
    found = engine._parts.get("sensitivity")
    if found is None:
        with _batch_lock:
            found = engine._parts.get("sensitivity")
            if found is None:
                text = module_source(system, jit=engine.compiled, part="sensitivity")
                digest = _digest(text)
                module = _import_compiled(text, digest, "s") if engine.compiled else _exec_module(text, f"pys{digest}")
                found = engine._parts["sensitivity"] = module.sensitivity_at
    return found


def available() -> bool:
    return jitting.enabled()


def engine_loops():
    """The engine's loops without a model's kernels (a delay model runs in Python): compiled where numba
    is (each loaded from numba's cache when first called), plain Python otherwise."""
    return jitting.compiled_loops(*LOOP_MODULES) if available() else jitting.python_loops(*LOOP_MODULES)


def module_source(system, jit: bool, batch: bool = False, part: str = "") -> str:
    """The kernels' module text (kept on the system); ``batch`` or ``part`` = "batch": the batched
    kernel's module; ``part`` = "sensitivity": the sensitivity kernel's (``codegen.sensitivity_source``)."""
    part = "batch" if batch else part
    key = ("_kernel_source_jit" if jit else "_kernel_source_py") + (f"_{part}" if part else "")
    cached = system.__dict__.get(key)
    if cached is None:
        inlined = part or "model"  # the kernel the loops call through its pointer cfunc (``_at_kernel``)
        if part == "batch":  # compiled only: the plain-Python engine's is numpy's (numpy_batch)
            if not jit:
                raise ValueError("the plain-Python batched kernel is codegen.vector_source's")
            head = ["import math", "from math import *  # noqa: F401,F403", "import numpy as np",
                    "from numba import cfunc", "from orbitdesk.engine import jitting", "",
                    f"_batch_kernel = cfunc(jitting.signature('BATCH'), {_CACHE_OPTION}, error_model='numpy')"]
        elif jit:
            head = ["import math", "from math import *  # noqa: F401,F403", "import numpy as np",
                    "from numba import carray, cfunc, njit", "from orbitdesk.engine import jitting", "", "",
                    "def _plain(f):", "    return f", "",
                    f"_{inlined}_kernel = njit(error_model='numpy', inline='always')  # compiled into {inlined}_at"]
            head += [f"_{name}_kernel = cfunc(jitting.signature({sig!r}), {_CACHE_OPTION}, error_model='numpy')"
                     for name, sig in _signatures(system, part).items()]
            # parts of a large kernel (codegen._split_model): compiled with it, into its machine code
            head += ["_part_kernel = njit(error_model='numpy', nogil=True)"]
        else:
            head = ["import math", "from math import *  # noqa: F401,F403",
                    f"{', '.join(float_math.NAMES)} = _OVERFLOW_IS_INF  # float_math's: an overflow is inf, as compiled",
                    "import numpy as np", "", "",
                    "def _plain(f):", "    return f", "", "",
                    "def _fill_nan(a):", "    a[...] = math.nan", ""]
            head += [f"_{name}_kernel = _plain" for name in list(_signatures(system, part)) + [inlined, "part"]]
        if not part:
            head += ["_jac_kernel = _jac_values_kernel = _plain  # called from Python (stiff solvers, Newton)"]
        foot = "" if part == "batch" else _at_kernel(inlined) if jit else f"\n\n{inlined}_at = {inlined}\n"
        cached = system.__dict__[key] = HEADER + "\n".join(head) + "\n\n\n" + kernel_source(
            system, guard=not jit, part=part) + foot + "\n"
    return cached


def _signatures(system, part: str = "") -> dict:
    """The kernels of this model's module compiled as cfuncs on arrays: ``sde`` for a model with noise
    (``model``, and the sensitivity module's ``sensitivity``, are inlined into their ``_at`` cfuncs)."""
    if part == "sensitivity":
        return {}  # sensitivity: inlined into sensitivity_at, on pointers
    return {**_SIGNATURES, "sde": "MODEL"} if system.stochastic else _SIGNATURES


def _digest(source: str) -> str:
    text = f"{source}\n# numba {_numba_version()}, python {sys.version_info[:2]}, loaded by private_cache"
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def _model_digest(system) -> str:
    """``_digest`` of the model's kernel module (kept on the system: callers ask for the engine often)."""
    cached = system.__dict__.get("_kernel_digest")
    if cached is None:
        cached = system.__dict__["_kernel_digest"] = _digest(module_source(system, jit=True))
    return cached


def _numba_version() -> str:
    """numba's version without importing it (a plain-Python run never pays for that import). A module
    another thread is still importing has no ``__version__`` yet: the installed package's metadata then."""
    known = getattr(sys.modules.get("numba"), "__version__", None)
    if known is not None:
        return known
    from importlib.metadata import version

    return version("numba")


def cache_folder() -> Path | None:
    """The private folder of compiled kernels (private_cache.py), or None when it or the folder of
    numba's machine code in it (pickles numba loads) is refused."""
    folder = private_cache.private_folder("kernels")
    if folder is None or private_cache.private_folder("kernels", "__pycache__") is None:
        return None
    return folder


def _exec_module(source: str, name: str, folder: Path | None = None) -> ModuleType:
    """The module of ``source`` (our printer's output, never model text), kept in ``folder`` if given."""
    names = {"_UNDEFINED": UNDEFINED_ERRORS, "_OVERFLOW_IS_INF": tuple(float_math.NAMES.values())}
    return private_cache.load_source_module(folder, name, source, names,
                                            module_name=f"orbitdesk_kernels_{name}", on_disk_flag="_ON_DISK")


def _import_compiled(source: str, digest: str, prefix: str = "m") -> ModuleType:
    import numba

    folder = cache_folder()
    if folder is None or numba.config.CACHE_DIR:  # no safe place for its machine code: compile in memory
        return _exec_module(source, f"{prefix}{digest}")  # no folder: _ON_DISK is False
    return _exec_module(source, f"{prefix}{digest}", folder)


def _compile(source: str, digest: str, batch_text: str) -> Engine:
    from orbitdesk.engine.drivers import warm_up

    engine = Engine(jitting.compiled_loops(*LOOP_MODULES), _import_compiled(source, digest), True, batch_text)
    warm_up(engine)  # compile the loops for these kernels (or load them from numba's cache)
    with _lock:
        _engines[digest] = engine
        _pending.pop(digest, None)
    return engine


def python_engine(system) -> Engine:
    """The plain-Python engine of the model (kept on the system)."""
    cached = system.__dict__.get("_python_engine")
    if cached is None:
        kernels = _exec_module(module_source(system, jit=False), f"py{id(system)}")
        cached = system.__dict__["_python_engine"] = Engine(jitting.python_loops(*LOOP_MODULES), kernels, False,
                                                            _batch=numpy_batch(system))
    return cached


def numpy_batch(system):
    """The batched kernel of the plain-Python engine: ``batch(which, T, z, p, out, count)`` as
    ``codegen.batch_source`` defines it, each row one numpy expression over the members
    (``codegen.vector_source``, which ``CompiledSystem.rhs_vec``/``jac_vec`` use too) instead of a Python
    loop over them. Undefined values come out as NaN and a division by zero as infinite, as in the
    compiled kernels (numpy's error model)."""
    from orbitdesk.system.codegen import vector_kernels

    def batch(which, T, z, p, out, count):  # printed when members first run: a single run never waits for it
        with np.errstate(all="ignore"):
            vector_kernels(system).batch(which, T, z, p, out, count)

    return batch


def is_compiled(system) -> bool:
    return available() and _model_digest(system) in _engines


def engine_for(system, wait: bool = False) -> Engine:
    """The compiled engine when ready (``wait``: compile now if needed), else the plain-Python one."""
    if not available():
        return python_engine(system)
    source = module_source(system, jit=True)
    digest = _model_digest(system)
    with _lock:
        engine = _engines.get(digest)
        thread = _pending.get(digest)
    if engine is not None:
        return engine
    if not wait and not _cached_on_disk(digest):
        return python_engine(system)
    if thread is not None:
        thread.join()
        with _lock:
            if digest in _engines:
                return _engines[digest]
    return _compile(source, digest, module_source(system, jit=True, batch=True))


def _cached_on_disk(digest: str) -> bool:
    """The model's kernels are in the cache from an earlier process and numba is loaded already:
    loading them costs less than a plain-Python run."""
    if "numba" not in sys.modules:
        return False
    folder = cache_folder()
    return folder is not None and (folder / f"m{digest}.py").exists() and any(
        (folder / "__pycache__").glob(f"m{digest}.*.nbi"))


def prepare(system) -> None:
    """Compile the model's kernels on a background thread (nothing when ready or under way)."""
    if not available():
        return
    source = module_source(system, jit=True)
    digest = _model_digest(system)
    with _lock:
        if digest in _engines or digest in _pending:
            return
        thread = _pending[digest] = threading.Thread(target=_background, daemon=True,
                                                     args=(source, digest, module_source(system, jit=True, batch=True)),
                                                     name="orbitdesk-compile")
    thread.start()


def _background(source, digest, batch_text):
    try:
        _compile(source, digest, batch_text)
    except Exception:  # the Python engine keeps serving; a later wait=True call reports the problem
        with _lock:
            _pending.pop(digest, None)


WORTH_COMPILING = 100_000  # estimated right-hand-side evaluations above which a caller waits for the compiler


def engine_for_work(system, evaluations: float) -> Engine:
    """The compiled engine if ready; for work large enough that compiling pays, compile now."""
    return engine_for(system, wait=math.isfinite(evaluations) and evaluations >= WORTH_COMPILING)


__all__ = ["Engine", "available", "engine_loops", "module_source", "cache_folder", "engine_for", "engine_for_work", "prepare",
           "python_engine", "sensitivity_kernel", "is_compiled", "WORTH_COMPILING"]
