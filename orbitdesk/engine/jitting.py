"""Compiling the loops of this package with numba, or running them as plain Python.

Loops are marked ``@loop``, or ``@noref`` when they make no arrays: those are compiled without numba's
reference counting (every array view and every call passing arrays otherwise costs atomic increments
and decrements: a quarter of a Dormand-Prince step, half of a step that reads samples). Helpers are
``@noref`` too (compiled once per argument types and linked into their callers, where LLVM still
inlines what is small), or ``@inner`` (inlined into every caller: only the few on the hot path that
call the kernel, e.g. one Runge-Kutta step). Every inlined copy goes
through all of numba's passes again, so a helper inlined at many sites multiplies the cold compile;
a rarely taken branch that calls the kernel (dense output, sub-steps, root finding) is a ``@loop`` of
its own, called. The modules stay plain Python; ``compiled_loops`` makes numba versions of every
marked function in one namespace (``cache=True``: machine code kept next to this package, compiled
once per machine) and ``python_loops`` gives the plain ones. Importing this package therefore never
imports numba: a short run that uses plain Python starts as fast as numpy and scipy.

numba keys its cache of a function by that function's own source file: a loop whose helper (inlined or
linked in) lives in another loop module would load its old machine code after the helper changed. The
loops' cache entries are therefore stamped with one hash over every loop module's source and the
modules they import from this package (``loops_stamp``; numba's own stamp is the hash of one file):
a change in any of them recompiles every loop once, and nothing stale is loaded (``_LoopsLocator``).

The model's kernel reaches the loops as an argument (numba's first-class function type), so the
loops are compiled once for every model; only the kernels are compiled per model
(``compiled.py``). One kernel argument only: a second function-typed argument, or passing a kernel
into a compiled function that is not inlined, makes every call through it several times slower.
"""

from __future__ import annotations

import functools
import hashlib
import importlib.util
import os
import re
import sys
import threading
from types import FunctionType, SimpleNamespace

_MARK = "_orbitdesk_loop"
_lock = threading.Lock()
_namespaces: dict[tuple, SimpleNamespace] = {}


def enabled() -> bool:
    """numba can be imported and the plain-Python path is not forced (ORBITDESK_NO_JIT=1)."""
    if os.environ.get("ORBITDESK_NO_JIT", "").strip().lower() not in ("", "0", "no", "off", "false"):
        return False
    return _numba_installed()


@functools.lru_cache(maxsize=None)
def _numba_installed() -> bool:
    # once per process: the search for the package costs about a millisecond, and every evaluation of
    # the model from Python (CompiledSystem.rhs/jac until its kernels are compiled) asks
    return importlib.util.find_spec("numba") is not None


def loop(f):
    """Mark ``f`` as a loop to compile."""
    setattr(f, _MARK, "loop")
    return f


def inner(f):
    """Mark ``f`` as a helper to compile inlined into its callers."""
    setattr(f, _MARK, "inner")
    return f


def noref(f):
    """Mark ``f`` as a loop or helper compiled apart, without reference counting: it must make no
    arrays (views of its arguments are fine)."""
    setattr(f, _MARK, "noref")
    return f


def numpy_version(plain):
    """Mark a block helper (``@noref``) whose plain-Python version is ``plain``: the same arithmetic on
    whole slices with numpy. The element-by-element loops numba compiles to a few instructions cost a
    Python bytecode each when the loops run as plain Python (ORBITDESK_NO_JIT, or before numba is
    ready); ``python_loops`` puts ``plain`` in their place."""
    def mark(f):
        f._orbitdesk_numpy = plain
        return f

    return mark


def at(a):
    """What the loops hand the model's kernel for the array ``a``: in plain Python the array itself; in
    the compiled loops a pointer to its data (``_numba_at``: C-contiguous arrays only), which the
    compiled kernel (``compiled.py``: ``model_at``) wraps back into arrays. Three array structures
    passed by value cost more than Lorenz's arithmetic: a Dormand-Prince 8 step took 560 ns with them,
    290 ns with pointers. Call the kernel as ``f(which, t, at(z), at(p), at(out))``."""
    return a


def _numba_at():
    from numba import types
    from numba.extending import intrinsic

    @intrinsic
    def at(typingctx, a):
        if not (isinstance(a, types.Array) and a.dtype == types.float64 and a.layout == "C"):
            return None  # a typing error: only the data of a C-contiguous float array is a kernel's vector
        def codegen(context, builder, signature, args):
            return context.make_array(signature.args[0])(context, builder, args[0]).data

        return types.CPointer(types.float64)(a), codegen

    return at


def _loops(modules, wrap, overrides=None) -> SimpleNamespace:
    """The modules' names in one namespace (with ``overrides``), each marked function rebuilt on it and
    passed to ``wrap``."""
    key = (wrap.__name__,) + tuple(m.__name__ for m in modules)
    with _lock:
        cached = _namespaces.get(key)
        if cached is None:
            namespace = {}
            for module in modules:
                namespace.update(vars(module))
            namespace.update(overrides() if overrides else {})
            stamp = loops_stamp(modules) if wrap is _numba else None
            for name, value in list(namespace.items()):
                kind = getattr(value, _MARK, None)
                if kind is not None and wrap is _plain and hasattr(value, "_orbitdesk_numpy"):
                    namespace[name] = value._orbitdesk_numpy
                elif kind is not None:
                    copy = FunctionType(value.__code__, namespace, name, value.__defaults__, value.__closure__)
                    copy.__module__, copy.__qualname__ = value.__module__, value.__qualname__
                    copy._orbitdesk_stamp = stamp  # read by _LoopsLocator when numba sets up its cache
                    namespace[name] = wrap(copy, kind)
            cached = _namespaces[key] = SimpleNamespace(**namespace)
    return cached


_FROM = re.compile(r"^from[ \t]+([\w.]+)[ \t]+import[ \t]+(\([^)]*\)|[^\n]*)", re.MULTILINE)
_IMPORT = re.compile(r"^import[ \t]+([^\n]*)", re.MULTILINE)


def _imported(text: str) -> set[str]:
    """The names of the modules the source ``text`` imports at its top level, where the names the loops
    see come from (a ``from`` import's names taken as modules too: ``from package import module``)."""
    names = set()
    for found in _FROM.finditer(text):
        names.add(found.group(1))
        for part in re.sub(r"#[^\n]*", "", found.group(2)).strip("()").split(","):
            words = part.split()
            if words:
                names.add(f"{found.group(1)}.{words[0]}")
    for found in _IMPORT.finditer(text):
        for part in re.sub(r"#.*", "", found.group(1)).split(","):
            words = part.split()
            if words:
                names.add(words[0])
    return names


def loop_sources(modules) -> list[str]:
    """The source files the compiled loops of ``modules`` are built from: the modules, this one (the
    markers, ``at``) and, followed through, every module of the same package they import at their top
    level (helpers, and the constants numba freezes into the machine code: status codes, row numbers);
    packages' ``__init__`` files are not followed."""
    package = {m.__name__.split(".")[0] for m in modules}
    files, seen = [], set()
    todo = [m.__name__ for m in modules] + [__name__]
    while todo:
        name = todo.pop()
        if name in seen:
            continue
        seen.add(name)
        module = sys.modules.get(name)
        path = getattr(module, "__file__", None)
        if not path or not path.endswith(".py") or hasattr(module, "__path__"):
            continue
        files.append(path)
        with open(path, encoding="utf-8") as handle:
            text = handle.read()
        todo += [imported for imported in _imported(text) if imported.split(".")[0] in package]
    return sorted(files)


def loops_stamp(modules) -> str:
    """One hash over the source of every file ``loop_sources`` names: the stamp of every loop's cache
    entry (``_LoopsLocator``). About a millisecond, once per namespace of loops."""
    digest = hashlib.sha256()
    for path in loop_sources(modules):
        with open(path, "rb") as handle:
            data = handle.read()
        digest.update(f"{os.path.basename(path)}:{len(data)}:".encode())
        digest.update(data)
    return digest.hexdigest()


@functools.lru_cache(maxsize=None)
def _loops_locator():
    """A numba cache locator for the loops (installed ahead of numba's own): the folder numba would choose
    (its own locators, NUMBA_CACHE_DIR honoured), the stamp from ``loops_stamp`` instead of the hash of the
    function's one file. numba's index keeps the stamp and drops its entries when the stamp differs, so a
    change in any loop module recompiles every loop (once) instead of loading one built on an old helper."""
    from numba.core import caching

    class _LoopsLocator(caching._CacheLocator):
        def __init__(self, found, stamp):
            self._found, self._stamp = found, stamp

        def ensure_cache_path(self):
            self._found.ensure_cache_path()

        def get_cache_path(self):
            return self._found.get_cache_path()

        def get_source_stamp(self):
            return self._stamp

        def get_disambiguator(self):
            return self._found.get_disambiguator()

        @classmethod
        def from_function(cls, py_func, py_file):
            stamp = getattr(py_func, "_orbitdesk_stamp", None)
            if stamp is None:
                return None
            for other in caching.CacheImpl._locator_classes:
                found = None if other is cls else other.from_function(py_func, py_file)
                if found is not None:
                    return cls(found, stamp)
            return None

    caching.CacheImpl._locator_classes.insert(0, _LoopsLocator)
    return _LoopsLocator


def _plain(f, kind):
    return f


def _numba(f, kind):
    import numba

    _loops_locator()
    options = dict(cache=True, error_model="numpy", nogil=True)
    if kind == "inner":
        options["inline"] = "always"
    elif kind == "noref":
        options["_nrt"] = False
    return numba.njit(**options)(f)


def python_loops(*modules) -> SimpleNamespace:
    """The functions of the loop modules as plain Python, in one namespace."""
    return _loops(modules, _plain)


def compiled_loops(*modules) -> SimpleNamespace:
    """numba versions of the marked functions of ``modules``, calling each other compiled."""
    return _loops(modules, _numba, lambda: {"at": _numba_at()})


def entry(fn):
    """``fn`` for many calls from Python (a stepper's step, a solver's right-hand side, a run's
    pauses): a compiled loop is called through numba's entry point for the argument types of its
    first call, skipping numba's typing of every argument on each call (the kernel argument's alone
    costs about 70 µs, more than a step); a call whose arrays or scalars differ in kind from the
    first goes through numba's dispatcher as usual. Plain Python is returned as it is."""
    overloads = getattr(fn, "overloads", None)
    if overloads is None:
        return fn
    known = {}

    def call(*args):
        key = _kinds(args)
        found = known.get(key)
        if found is not None:
            return found(*args)
        types = tuple(fn.typeof_pyval(a) for a in args)
        result = fn(*args)
        compiled = overloads.get(types)
        if compiled is not None:
            known[key] = compiled.entry_point
        return result

    return call


# numpy's flag bits numba's typing of an array reads: C- and F-contiguous, aligned, writeable
_ARRAY_FLAGS = 0x1 | 0x2 | 0x100 | 0x400


def _kinds(args) -> tuple:
    """What numba's typing of ``args`` depends on, cheaply: arrays' dtype, dimensions, layout,
    alignment and writability (one read of numpy's flag bits, not an attribute each: about 40% less
    for erk_advance's 27 arguments, timed side by side); the type of anything else (the kernel: its own
    object, one signature per engine)."""
    import numpy as np

    ndarray = np.ndarray
    return tuple((a.dtype.num, a.ndim, a.flags.num & _ARRAY_FLAGS) if isinstance(a, ndarray)
                 else (type(a), id(a)) if callable(a) else type(a) for a in args)


def signature(name: str):
    """The numba signature of a kernel: MODEL (model(which, t, z, p, out)), MODEL_AT (the same on
    pointers to the arrays' data, ``at``), BATCH (batch(which, T, z, p, out, count), members in
    columns), JAC (jac(t, u, p, out)) or VALUES (jac_values(t, u, p, out))."""
    from numba import types as t

    a1, a2, ptr = t.float64[::1], t.float64[:, ::1], t.CPointer(t.float64)
    return {"MODEL": t.void(t.int64, t.float64, a1, a1, a1), "MODEL_AT": t.void(t.int64, t.float64, ptr, ptr, ptr),
            "BATCH": t.void(t.int64, a1, a2, a2, a2, t.int64), "JAC": t.void(t.float64, a1, a1, a2),
            "VALUES": t.void(t.float64, a1, a1, a1)}[name]


__all__ = ["at", "enabled", "entry", "loop", "inner", "noref", "python_loops", "compiled_loops", "signature"]
