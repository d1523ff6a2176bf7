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

* ``rk4_final``: classical RK4 for each member in turn (all steps of a member while it sits in
  registers), the same arithmetic order as ``ensemble.rk4_run``; members that pass ``bound`` or
  go non-finite are frozen at their last good state.
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

from . import private_cache
from .system import MAP, _printer

STATUS_OK, STATUS_DIVERGED, STATUS_UNDEFINED = 0, 1, 2
MIN_WORK = 5_000_000  # member-steps below which numpy is used unless the model's code is already compiled
_lock = threading.Lock()
_loaded: dict[str, object] = {}


def available() -> bool:
    """numba is importable and the compiled path is not turned off."""
    if os.environ.get("ORBITDESK_JIT", "1").strip().lower() in ("0", "no", "off", "false"):
        return False
    from .integrators.jitting import enabled

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


def _rk4_loop(n, n_p) -> list[str]:
    """RK4 over members for a model of ``n`` states and ``n_p`` parameters, unrolled over the states.

    Steps outside, members inside, branch-free so the member loop vectorises: every member computes
    its step, a member that goes bad (or was frozen) keeps its state, and the rare new failures are
    booked after the member loop. The arithmetic order is that of ``ensemble.rk4_run``."""
    u, p = _names("u", n), _names("p", n_p)
    k = {s: _names(f"k{s}_", n) for s in (1, 2, 3, 4)}
    v = _names("v", n)
    tup = lambda names: ", ".join(names) + ("," if len(names) == 1 else "")  # noqa: E731
    pl = ", ".join(p)
    call = (lambda tt, args: f"rhs({tt}, {', '.join(args)}{', ' + pl if p else ''})")

    def member_loop(indent, load_params):
        pad = " " * indent
        lines = [f"{pad}for i in range(N):"]
        lines += [f"{pad}    {p[r]} = P[{r}, i]" for r in range(n_p)] if load_params else []
        lines += [f"{pad}    {u[r]} = U[{r}, i]" for r in range(n)]
        lines.append(f"{pad}    {tup(k[1])} = {call('t', u)}")
        lines.append(f"{pad}    {tup(k[2])} = {call('t + half', [f'{k[1][r]} * half + {u[r]}' for r in range(n)])}")
        lines.append(f"{pad}    {tup(k[3])} = {call('t + half', [f'{k[2][r]} * half + {u[r]}' for r in range(n)])}")
        lines.append(f"{pad}    {tup(k[4])} = {call('t + dt', [f'{k[3][r]} * dt + {u[r]}' for r in range(n)])}")
        lines += [f"{pad}    {v[r]} = (((({k[2][r]} * 2.0 + {k[1][r]}) + {k[3][r]}) + {k[3][r]}) + {k[4][r]})"
                  f" * sixth + {u[r]}" for r in range(n)]
        lines.append(f"{pad}    ok = " + " & ".join(f"(abs({x}) <= bound)" for x in v))
        lines.append(f"{pad}    go = ok & live[i]")
        lines += [f"{pad}    U[{r}, i] = {v[r]} if go else {u[r]}" for r in range(n)]
        lines.append(f"{pad}    fresh = live[i] & (not ok)")
        lines.append(f"{pad}    mark[i] = fresh * (1 + (" + " | ".join(f"({x} != {x})" for x in v) + "))")
        lines.append(f"{pad}    live[i] = go")
        lines.append(f"{pad}    failed += fresh")
        return lines

    body = [
        "@numba.njit(cache=CACHE, error_model='numpy', nogil=True)",
        "def rk4_final(U, P, t0, dt, first, count, bound, status, when):",
        "    N = U.shape[1]",
        "    shared = P.shape[1] == 1",
        "    live = status == 0",
        "    mark = np.zeros(N, dtype=np.int8)",
        "    half = dt / 2.0",
        "    sixth = dt / 6.0",
    ]
    body += [f"    {p[r]} = P[{r}, 0]" for r in range(n_p)]
    body += ["    for step in range(first + 1, first + count + 1):",
             "        t = t0 + (step - 1) * dt",
             "        failed = 0",
             "        if shared:"]
    body += member_loop(12, False)
    body.append("        else:")
    body += member_loop(12, True)
    body += ["        if failed:",
             "            for i in range(N):",
             "                if mark[i]:",
             "                    status[i] = mark[i]",
             "                    when[i] = t0 + step * dt"]
    return body


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
    lines = ["# generated by orbitdesk.core.jit from a compiled model; safe to delete",
             "import math", "from math import *", "import numba", "import numpy as np", ""]
    lines += _function("rhs", t, u, p, system.plain(system.f)) + [""]
    if system.kind == MAP and system.smooth:  # the exponent loop needs the exact Jacobian
        lines += _function("jac", t, u, p, system.plain(list(system.jacobian))) + [""]
        lines += _lyapunov_loop(n, n_p) + [""]
    if system.kind != MAP:
        lines += _rk4_loop(n, n_p) + [""]
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


def rk4_final(system, U, P, t0, dt, n_steps, bound, report=None, pieces=20):
    """Final states of RK4 runs, in place in ``U`` (n, N); returns (U, status codes, freeze times).

    The steps are run in about ``pieces`` stretches so progress and cancel are honoured between them;
    times are ``t0 + k*dt`` exactly, as in ``ensemble.rk4_run``."""
    module = kernels(system)
    U = np.ascontiguousarray(U, dtype=float)
    N = U.shape[1]
    P = np.asarray(P, dtype=float)
    P2 = P[:, None].copy() if P.ndim == 1 else np.ascontiguousarray(P)
    status = np.zeros(N, dtype=np.int64)
    when = np.full(N, np.nan)
    n_steps = int(n_steps)
    stretch = max(1, -(-n_steps // max(1, pieces)))
    for done in range(0, n_steps, stretch):
        count = min(stretch, n_steps - done)
        module.rk4_final(U, P2, float(t0), float(dt), done, count, float(bound), status, when)
        if report is not None:
            report((done + count) / n_steps)
    return U, status, when


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
