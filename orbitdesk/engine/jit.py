"""Optional compiled ensembles with numba (extra ``jit``); everything works without it.

For a model, ``kernels(system)`` generates a small module — the right-hand side printed from the
compiled sympy trees (as ``system.scalar_source`` does, never from model text) plus fixed-step
loops over members — and loads it with ``private_cache.load_source_module``: the text is kept in the
private per-user cache folder (mode 0700, refused if anybody else could write it) under a name that
is the hash of its text, read back, checked against that hash and compiled; no bytecode file is
ever loaded from there. The loops are ``numba.njit(cache=CACHE)``: when the folder is verified,
numba keeps its machine code (pickles) in its ``__pycache__`` (also verified private), so a model
compiled once loads in a fraction of a second in later processes; otherwise (refused folder, or
numba told to cache elsewhere by ``NUMBA_CACHE_DIR``) nothing is cached on disk.

* ``map_lyapunov``: the largest Lyapunov exponent of a map for each member, with the tangent
  vector evolved by the exact Jacobian and renormalised every step (as ``sweep.grid_exponents``).

``ORBITDESK_JIT=0`` turns the compiled path off; ``ORBITDESK_CACHE`` moves the cache directory.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import sys
import threading
from pathlib import Path

import numpy as np
import sympy as sp

from orbitdesk.system import private_cache
from orbitdesk.system.compiled_system import MAP, _printer

STATUS_OK, STATUS_DIVERGED, STATUS_UNDEFINED = 0, 1, 2
MIN_WORK = 5_000_000  # member-steps below which numpy is used unless the model's code is already compiled
_lock = threading.Lock()
_loaded: dict[str, object] = {}


def available() -> bool:
    """numba is importable and the compiled path is not turned off."""
    if os.environ.get("ORBITDESK_JIT", "1").strip().lower() in ("0", "no", "off", "false"):
        return False
    from orbitdesk.engine.jitting import enabled

    if not enabled():
        return False
    return importlib.util.find_spec("numba") is not None


def cache_dir() -> Path:
    return private_cache.cache_root() / "jit"


def _numba_cache_folder(create: bool = True) -> Path | None:
    """The verified private folder for the generated modules, or None (no disk cache)."""
    folder = private_cache.private_folder("jit", create=create)
    if folder is None or private_cache.private_folder("jit", "__pycache__", create=create) is None:
        return None
    return folder


def _numba_caches_there() -> bool:
    """numba puts its cache beside the module file (not in a folder of its own choosing)."""
    import numba

    return not numba.config.CACHE_DIR and not getattr(numba.config, "CACHE_LOCATOR_CLASSES", "")


def _function(name, t, u, p, exprs) -> list[str]:
    """``def name(t, *u, *p) -> tuple`` of ``exprs`` (inlined into the loops by numba)."""
    printer = _printer()
    replacements, reduced = sp.cse(list(exprs), symbols=sp.numbered_symbols("_x"), optimizations=None)
    args = ", ".join(printer.doprint(s) for s in [t, *u, *p])
    lines = ["@numba.njit(cache=CACHE, error_model='numpy', nogil=True, inline='always')",
             f"def {name}({args}):"]
    lines += [f"    {printer.doprint(s)} = {printer.doprint(e)}" for s, e in replacements]
    lines.append("    return (" + ", ".join(printer.doprint(e) for e in reduced) + ",)")
    return lines


def _names(prefix, count):
    return [f"{prefix}{i}" for i in range(count)]


def _lyapunov_loop(n, n_p) -> list[str]:
    """Largest exponent of a map per member: tangent vector by the exact Jacobian, renormalised each step."""
    u, p, w, v = _names("u", n), _names("p", n_p), _names("w", n), _names("y", n)
    jn = [f"j{r}_{c}" for r in range(n) for c in range(n)]
    tup = lambda names: ", ".join(names) + ("," if len(names) == 1 else "")  # noqa: E731
    args = ", ".join(u + p)
    body = [
        "@numba.njit(cache=CACHE, error_model='numpy', nogil=True)",
        "def map_lyapunov(U, P, n0, keep_from, n_steps, bound, v0, status, total):",
        "    N = U.shape[1]",
        "    shared = P.shape[1] == 1",
        f"    V = np.empty(({n}, N))",
        "    live = np.ones(N, dtype=np.bool_)",
        "    for i in range(N):",
    ]
    body += [f"        V[{r}, i] = v0[{r}]" for r in range(n)]
    body += ["    for step in range(1, n_steps + 1):",
             "        k = n0 + step - 1",
             "        for i in range(N):",
             "            if not live[i]:",
             "                continue",
             "            j = 0 if shared else i"]
    body += [f"            {p[r]} = P[{r}, j]" for r in range(n_p)]
    body += [f"            {u[r]} = U[{r}, i]" for r in range(n)]
    body.append(f"            {tup(jn)} = jac(k, {args})")
    body.append(f"            {tup(v)} = rhs(k, {args})")
    body.append("            if not (" + " and ".join(f"abs({x}) <= bound" for x in v) + "):")
    body.append("                status[i] = 2 if (" + " or ".join(f"{x} != {x}" for x in v) + ") else 1")
    body += ["                live[i] = False", "                continue"]
    for r in range(n):
        terms = " + ".join(f"j{r}_{c} * V[{c}, i]" for c in range(n))
        body.append(f"            {w[r]} = {terms}")
    body.append("            norm = np.sqrt(" + " + ".join(f"{x} * {x}" for x in w) + ")")
    body += ["            scale = 1.0 / norm if norm > 0 else 1.0",
             "            if step > keep_from:",
             "                total[i] += np.log(max(norm, 1e-300))"]
    body += [f"            V[{r}, i] = {w[r]} * scale" for r in range(n)]
    body += [f"            U[{r}, i] = {v[r]}" for r in range(n)]
    return body


def module_source(system) -> str:
    """The generated module's text for ``system`` (kept on the system after the first call)."""
    cached = system.__dict__.get("_jit_source")
    if cached is None:
        cached = system.__dict__["_jit_source"] = _module_source(system)
    return cached


def _module_source(system) -> str:
    t, u, p, _ = system._plain
    n, n_p = len(u), len(p)
    lines = ["# generated by orbitdesk.engine.jit from a compiled model; safe to delete",
             "import math", "from math import *", "import numba", "import numpy as np", ""]
    lines += _function("rhs", t, u, p, system.plain(system.f)) + [""]
    if system.kind == MAP and system.smooth:  # the exponent loop needs the exact Jacobian
        lines += _function("jac", t, u, p, system.plain(list(system.jacobian))) + [""]
        lines += _lyapunov_loop(n, n_p) + [""]
    return "\n".join(lines) + "\n"


def _key(source: str) -> str:
    import numba

    text = f"{source}\n# numba {numba.__version__}, numpy {np.__version__}, python {sys.version_info[:2]}"
    return hashlib.sha256(text.encode()).hexdigest()[:24]


def is_compiled(system) -> bool:
    """The model's module exists in the cache and numba has stored machine code for it."""
    if not available():
        return False
    key = _key(module_source(system))
    if key in _loaded:
        return True
    folder = _numba_cache_folder(create=False)
    return (folder is not None and (folder / f"m{key}.py").exists()
            and any((folder / "__pycache__").glob(f"m{key}.*.nbi")))


def kernels(system):
    """The generated module for ``system`` (its functions compile on first call)."""
    source = module_source(system)
    key = _key(source)
    with _lock:
        if key in _loaded:
            return _loaded[key]
        folder = _numba_cache_folder()
        on_disk = folder is not None and _numba_caches_there()
        module = private_cache.load_source_module(folder if on_disk else None, f"m{key}", source,
                                                  module_name=f"orbitdesk_jit_m{key}", on_disk_flag="CACHE")
        _loaded[key] = module
        return module


def worth_it(system, member_steps: float) -> bool:
    """Use the compiled loops: numba is there and the work pays for compiling (or it is compiled)."""
    return available() and (member_steps >= MIN_WORK or is_compiled(system))


def map_lyapunov(system, U, P, n0, keep_from, n_steps, bound, v0, report=None, block=None):
    """Largest exponent per member of a map: (sums of the log stretch over the counted steps, status codes)."""
    module = kernels(system)
    U = np.ascontiguousarray(U, dtype=float)
    n, N = U.shape
    block = block or max(512, -(-N // 20))
    P = np.asarray(P, dtype=float)
    P2 = P[:, None].copy() if P.ndim == 1 else np.ascontiguousarray(P)
    status = np.zeros(N, dtype=np.int64)
    total = np.zeros(N)
    v0 = np.ascontiguousarray(v0, dtype=float)
    for start in range(0, N, block):
        stop = min(N, start + block)
        part = np.ascontiguousarray(U[:, start:stop])
        Pp = P2 if P2.shape[1] == 1 else np.ascontiguousarray(P2[:, start:stop])
        module.map_lyapunov(part, Pp, int(n0), int(keep_from), int(n_steps), float(bound), v0,
                            status[start:stop], total[start:stop])
        U[:, start:stop] = part
        if report is not None:
            report(stop / N)
    return total, status
