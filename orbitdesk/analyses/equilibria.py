"""Equilibria of flows (f(u) = 0) and fixed points of maps (f(u) = u), with their linearisation.

Two searches are combined: a multi-start Newton search from quasi-random starts in a box, on the
model's generated kernels (f and its sparse Jacobian), and beside it, for models of up to
``EXACT_MAX_STATES`` states, an exact one (sympy, in a forked child process under a time limit,
because a symbolic solve cannot be interrupted in-thread) whose points join at the end. Every point is refined with Newton steps before points are compared,
so that genuinely distinct nearby equilibria stay distinct.
"""

from __future__ import annotations

import json
import math
import multiprocessing
import os
import time
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
import sympy as sp
from scipy.stats import qmc

from orbitdesk.analyses.conservative import neutral_point, neutral_words, stability_word
from orbitdesk.language.angles import wrap_equilibria
from orbitdesk.engine.model_events import describe_events
from orbitdesk.engine.progress import CancelToken, Cancelled, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.analyses.newton import damped_newton, newton_starts
from orbitdesk.engine import limits, status

HYPERBOLIC_RTOL = 1e-9  # |Re lambda| (flows) or ||mu| - 1| (maps) below this * max(1, rho) counts as zero
NEAR_UNIT_TOL = 1e-6  # maps: warn about a multiplier this close to +1, -1 or the unit circle
EXACT, NEWTON, BOTH = "exact", "newton", "exact+newton"

NONSMOOTH_WARNING = ("the model uses {names}; its Jacobian is undefined at the kinks, so the "
                     "linearisation may not describe the point if it lies on one")


@dataclass
class Equilibrium:
    """An equilibrium of a flow or a fixed point of a map, with its linearisation."""

    state: dict[str, float]
    vector: np.ndarray
    jacobian: np.ndarray
    eigenvalues: np.ndarray  # complex; flows: sorted by real part, descending; maps: the multipliers
    eigenvectors: np.ndarray  # columns, in the order of the eigenvalues
    kind: str
    stable: bool | None
    n_stable: int
    n_unstable: int
    n_center: int
    method: str
    warnings: list[str] = field(default_factory=list)
    is_map: bool = False
    stability: str = ""  # in words: stable, unstable, undecided, or neutral (conservative flow / area-preserving map)

    def __post_init__(self):
        self.stability = self.stability or stability_word(self.stable)

    @property
    def hyperbolic(self) -> bool:
        return self.n_center == 0

    def to_dict(self) -> dict:
        eig = [{"re": float(v.real), "im": float(v.imag)} for v in self.eigenvalues]
        data = {"state": dict(self.state), "eigenvalues": eig, "kind": self.kind, "stable": self.stable,
                "stability": self.stability, "stable_dim": self.n_stable, "unstable_dim": self.n_unstable, "method": self.method,
                "warnings": list(self.warnings)}
        if self.is_map:
            data["multipliers"] = eig
        return data


class Equilibria(list):
    """The equilibria found (a list), plus notes about the search itself (``notes``), its box and how
    its Newton starts ended (``starts``: status word -> count, engine/status.py)."""

    def __init__(self, items=(), notes=None, box=None, starts=None):
        super().__init__(items)
        self.notes: list[str] = list(notes or [])
        self.box: dict[str, tuple[float, float]] = dict(box or {})
        self.starts: dict[str, int] = dict(starts or {})
        self.search = None  # what the search found (equilibria._Search), for refine_exactly


# ---------------------------------------------------------------- classification
ROUND_OFF = 1e-12  # entries this small against the largest of their matrix or vector are round-off


def zero_round_off(a, scale: float | None = None) -> np.ndarray:
    """A copy of ``a`` with every entry (real and imaginary parts apart) smaller than ``ROUND_OFF``
    times ``scale`` (default: the largest entry) set to exactly 0, so that a Jacobian entry of
    6.1e-17 that is 0 in exact arithmetic prints as 0 in the app, the report and the command line."""
    a = np.array(a, copy=True)
    if a.size == 0:
        return a
    scale = float(np.max(np.abs(a))) if scale is None else float(scale)
    limit = ROUND_OFF * scale
    if np.iscomplexobj(a):
        re, im = a.real.copy(), a.imag.copy()
        re[np.abs(re) < limit] = 0.0
        im[np.abs(im) < limit] = 0.0
        return (re + 0.0) + 1j * (im + 0.0)
    a[np.abs(a) < limit] = 0.0
    return a + 0.0  # no negative zeros


def classify(jacobian, is_map: bool = False) -> tuple:
    """(kind, stable, n_stable, n_unstable, n_center, eigenvalues, eigenvectors, warnings); round-off
    entries of the Jacobian are zeroed first, and those of each eigenvector and of the eigenvalues after."""
    jacobian = zero_round_off(np.asarray(jacobian, dtype=float))
    values, vectors = np.linalg.eig(jacobian)
    values = zero_round_off(values.astype(complex), max(float(np.max(np.abs(jacobian), initial=0.0)),
                                                        float(np.max(np.abs(values), initial=0.0))))
    vectors = vectors.astype(complex)
    order = np.lexsort((-values.imag, -np.abs(values) if is_map else -values.real))
    values, vectors = values[order], vectors[:, order]
    for k in range(vectors.shape[1]):
        vectors[:, k] = zero_round_off(_canonical_sign(vectors[:, k]))
    rho = float(np.max(np.abs(values))) if values.size else 0.0
    tol = HYPERBOLIC_RTOL * max(1.0, rho)
    return (*(_classify_map(values, tol) if is_map else _classify_flow(values, tol)), values, vectors)


def _canonical_sign(v):
    """Scale an eigenvector so that its largest component is real and positive."""
    k = int(np.argmax(np.abs(v)))
    if abs(v[k]) == 0:
        return v
    return v * (abs(v[k]) / v[k])


def _classify_flow(values, tol):
    re = values.real
    n_stable, n_unstable = int(np.sum(re < -tol)), int(np.sum(re > tol))
    n_center = len(values) - n_stable - n_unstable
    oscillating = bool(np.any(np.abs(values.imag) > tol))
    warnings: list[str] = []
    if n_center:
        if len(values) == 2 and n_center == 2 and oscillating:
            kind = "centre (linear)"
            warnings.append("the linearisation has a pure imaginary pair: the nonlinear terms decide "
                            "whether the point is a centre or a weak focus")
        else:
            kind = "non-hyperbolic"
            warnings.append("an eigenvalue has zero real part: the linearisation does not decide stability")
        stable = False if n_unstable else None
    elif n_unstable == 0:
        kind, stable = ("stable focus" if oscillating else "stable node"), True
    elif n_stable == 0:
        kind, stable = ("unstable focus" if oscillating else "unstable node"), False
    else:
        kind, stable = ("saddle-focus" if oscillating else "saddle"), False
    return kind, stable, n_stable, n_unstable, n_center, warnings


def _classify_map(values, tol):
    mod = np.abs(values)
    n_stable, n_unstable = int(np.sum(mod < 1 - tol)), int(np.sum(mod > 1 + tol))
    n_center = len(values) - n_stable - n_unstable
    warnings: list[str] = []
    for mu in values:
        if abs(mu.imag) <= NEAR_UNIT_TOL:
            if abs(mu.real + 1) <= NEAR_UNIT_TOL:
                warnings.append("flip (multiplier near -1)")
            elif abs(mu.real - 1) <= NEAR_UNIT_TOL:
                warnings.append("fold (multiplier near +1)")
        elif mu.imag > 0 and abs(abs(mu) - 1) <= NEAR_UNIT_TOL:
            warnings.append("Neimark-Sacker (complex pair on the unit circle)")
    warnings = list(dict.fromkeys(warnings))
    if n_center:
        kind, stable = "non-hyperbolic fixed point", (False if n_unstable else None)
    elif n_unstable == 0:
        kind, stable = "stable fixed point", True
    elif n_stable == 0:
        kind, stable = "unstable fixed point", False
    else:
        kind, stable = "saddle fixed point", False
    return kind, stable, n_stable, n_unstable, n_center, warnings


# ---------------------------------------------------------------- exact solve (child process)
def exact_number(value: float) -> sp.Expr:
    """A parameter value as an exact rational: short fractions (8/3) when they round-trip, else the decimal."""
    value = float(value)
    if value == int(value) and abs(value) < 1e15:
        return sp.Integer(int(value))
    short = Fraction(value).limit_denominator(10**6)
    if float(short) == value:
        return sp.Rational(short.numerator, short.denominator)
    exact = Fraction(repr(value))
    return sp.Rational(exact.numerator, exact.denominator)


def _exact_equations(system: CompiledSystem, p):
    t, u, psyms, _ = system._plain
    exprs = system.plain(list(system.f))
    subs = {s: exact_number(v) for s, v in zip(psyms, p)}
    subs[t] = sp.Integer(0)
    eqs = [sp.expand(e.xreplace(subs)) if e.is_polynomial(*u) else e.xreplace(subs) for e in exprs]
    if system.kind == MAP:
        eqs = [e - ui for e, ui in zip(eqs, u)]
    return eqs, u


def _solve_all(eqs, syms):
    try:
        return sp.solve(eqs, syms, dict=True)
    except NotImplementedError:
        solutions = sp.nonlinsolve(eqs, syms)
        if not isinstance(solutions, sp.FiniteSet):
            raise
        return [dict(zip(syms, sol)) for sol in solutions]


def _holds_along(eqs, syms, sol, tries: int = 3) -> bool:
    """Whether a solution with free coordinates is a curve or surface of equilibria: every equation holds
    at points along it. sympy also answers with a partial solution where it cannot eliminate a coordinate
    (a transcendental equation left over, or a coordinate given as a set): that is no continuum."""
    if not all(isinstance(v, sp.Expr) for v in sol.values()):
        return False
    rest = [e.subs(sol) for e in eqs]
    free = sorted(set().union(*(r.free_symbols for r in rest)) & set(syms), key=str)
    for k in range(tries):
        at = {s: sp.Float(0.31 + 0.17 * k + 0.05 * i) for i, s in enumerate(free)}
        for r in rest:
            try:
                v = complex(sp.N(r.subs(at), 30))
            except (TypeError, ValueError):
                return False
            if not (math.isfinite(v.real) and math.isfinite(v.imag)) or abs(v) > 1e-9:
                return False
    return True


def _exact_child(conn, system, p):
    """Runs in the forked child: build the equations (expand can blow up too: 176 s on a 699-factor
    product), solve, evaluate numerically, send back JSON (plain floats)."""
    try:
        eqs, syms = _exact_equations(system, p)
        out, continuum = [], False
        for sol in _solve_all(eqs, syms):
            if any(s not in sol for s in syms) or any(sol[s].free_symbols for s in syms):
                continuum = continuum or _holds_along(eqs, syms, sol)
                continue
            point = []
            for s in syms:
                try:
                    z = complex(sp.N(sol[s], 30))
                except (TypeError, ValueError):
                    point = None
                    break
                if not (math.isfinite(z.real) and math.isfinite(z.imag)) or abs(z.imag) > 1e-12 * max(1.0, abs(z.real)):
                    point = None
                    break
                point.append(z.real)
            if point is not None:
                out.append(point)
        conn.send_bytes(json.dumps({"solutions": out, "continuum": continuum}).encode())
    except Exception as exc:  # the child must always answer; the parent reports the reason
        conn.send_bytes(json.dumps({"error": f"{type(exc).__name__}: {exc}"}).encode())
    finally:
        conn.close()


EXACT_MAX_STATES = 10  # the exact solve is tried up to this many states (beyond, sympy rarely finishes)
WALL_FACTOR = 20.0  # the exact solve's wait ends after this many times its limit in wall-clock time


def _cpu_seconds(pid: int) -> float | None:
    """Processor time (user + system) a running child has used, from /proc; None where unreadable."""
    try:
        with open(f"/proc/{int(pid)}/stat", "rb") as f:
            fields = f.read().rsplit(b")", 1)[1].split()
        return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
    except (OSError, ValueError, IndexError):
        return None


class _ExactSolve:
    """The exact solve in a forked child, started at once; ``answer`` collects it (or gives up)."""

    def __init__(self, system: CompiledSystem, p):
        self.notes: list[str] = []
        self.child = None
        if "fork" not in multiprocessing.get_all_start_methods():
            self.notes.append("the exact solve needs the 'fork' start method, not available here; Newton search only")
            return
        ctx = multiprocessing.get_context("fork")
        self.receive, send = ctx.Pipe(duplex=False)
        # every symbolic step runs in the child, under the time limit: the parent only forks and waits
        self.child = ctx.Process(target=_exact_child, args=(send, system, p), daemon=True)
        self.child.start()
        send.close()
        self.started = time.monotonic()

    def answer(self, timeout: float, report=None) -> tuple[list, list[str]]:
        """Real finite solutions if the child answers within ``timeout`` seconds of its own computing.

        The limit counts the child's processor time (read from the system where it can be), so a busy
        machine gives the solve the same work as an idle one and the answer does not depend on the load;
        a wall-clock bound of WALL_FACTOR times the limit still ends the wait."""
        if self.child is None:
            return [], self.notes
        notes, answer = self.notes, None
        child, receive = self.child, self.receive
        try:
            while True:
                waited = time.monotonic() - self.started
                used = _cpu_seconds(child.pid)
                used = waited if used is None else used
                if used >= timeout or waited >= WALL_FACTOR * timeout:
                    break
                if receive.poll(min(0.05, max(timeout - used, 0.0))):
                    try:
                        answer = json.loads(receive.recv_bytes().decode())
                    except (EOFError, OSError, ValueError):
                        answer = {"error": "the exact solver stopped without an answer"}
                    break
                if not child.is_alive() and not receive.poll(0):
                    answer = {"error": "the exact solver stopped without an answer"}
                    break
                if report is not None:
                    report(min(used / timeout, 1.0) if timeout > 0 else 1.0)
        finally:
            self.close()
        if answer is None:
            notes.append(f"the exact solve did not finish within {timeout:g} s of computing; Newton search only")
            return [], notes
        if "error" in answer:
            notes.append(f"no exact solution ({answer['error']}); Newton search only")
            return [], notes
        if answer.get("continuum"):
            notes.append("the equilibria include a curve or surface (a solution with a free coordinate)")
        return [np.array(s, dtype=float) for s in answer["solutions"]], notes

    def close(self) -> None:
        if self.child is not None:
            if self.child.is_alive():
                self.child.kill()
            self.child.join(1.0)
            self.receive.close()
            self.child = None


def exact_solutions(system: CompiledSystem, p, timeout: float = 3.0, report=None) -> tuple[list, list[str]]:
    """Real finite solutions from sympy, computed in a forked child killed after ``timeout`` seconds."""
    return _ExactSolve(system, p).answer(timeout, report)


# ---------------------------------------------------------------- Newton search
def default_box(system: CompiledSystem, p, u0=None, extra=()) -> dict[str, tuple[float, float]]:
    """A search box around the initial values, the origin and known points, sized by the problem's scale."""
    u0 = system.initial if u0 is None else np.asarray(u0, dtype=float)
    values = [abs(v) for v in list(u0) + list(p) if math.isfinite(v)]
    scale = max([1.0] + values)
    box = {}
    for i, name in enumerate(system.states):
        known = [u0[i], 0.0] + [float(x[i]) for x in extra]
        box[name] = (min(known) - 2 * scale, max(known) + 2 * scale)
    return box


class _Undefined(Exception):
    pass


def _residual_functions(system: CompiledSystem, p):
    """G(x) = f(x) (maps: f(x) - x), its Jacobian, and for a system of more than SPARSE_STATES states
    the Jacobian as a scipy sparse matrix (else None), from the model's kernels (engine/compiled.py:
    generated code, the sparse Jacobian); _Undefined where a value is not a finite number."""
    from orbitdesk.engine.compiled import python_engine

    kernels = python_engine(system).kernels
    n = system.n_states
    eye = np.eye(n)
    is_map = system.kind == MAP
    p = np.ascontiguousarray(p, dtype=float)
    if p.size == 0:
        p = np.zeros(1)

    def G(x):
        x = np.ascontiguousarray(x, dtype=float)
        value = np.empty(n)
        kernels.model(0, 0.0, x, p, value)
        if not np.all(np.isfinite(value)):
            raise _Undefined
        return value - x if is_map else value

    def DG(x):
        J = np.zeros((n, n))
        kernels.jac(0.0, np.ascontiguousarray(x, dtype=float), p, J)
        if not np.all(np.isfinite(J)):
            raise _Undefined
        return J - eye if is_map else J

    if n <= SPARSE_STATES:
        return G, DG, None
    from scipy.sparse import csc_matrix, identity

    rows, cols = kernels.JAC_ROWS, kernels.JAC_COLS
    values = np.empty(rows.size)

    def DG_sparse(x):
        kernels.jac_values(0.0, np.ascontiguousarray(x, dtype=float), p, values)
        if not np.all(np.isfinite(values)):
            raise _Undefined
        J = csc_matrix((values.copy(), (rows, cols)), shape=(n, n))
        return J - identity(n, format="csc") if is_map else J

    return G, DG, DG_sparse


def _refine(G, DG, x, max_steps=100):
    """Newton steps to full precision (no damping: a step that does not lower |G| ends it, at the
    rounding level); returns (x, last step size, residual norm) or None."""
    track = {"steps": 0, "last": math.inf, "slow": 0}

    def done(state):
        if state.norm == 0.0:
            state.step_norm = 0.0
            return True
        if state.steps > track["steps"]:
            track["steps"] = state.steps
            track["slow"] = track["slow"] + 1 if state.step_norm > 0.95 * track["last"] else 0
            track["last"] = state.step_norm
            # not converging (a root at infinity, a very high multiplicity), or converged
            return track["slow"] >= 5 or state.step_norm <= 1e-15 * max(1.0, float(np.linalg.norm(state.x)))
        return False

    state = damped_newton(G, DG, x, done=done, max_iter=max_steps, min_damping=1.0, rejects=(_Undefined,),
                          singular="lstsq")
    if not np.all(np.isfinite(state.residual)):
        return None
    return state.x, (min(state.step_norm, state.tried) if state.stalled else state.step_norm), state.norm


SPARSE_STATES = 200  # above this many states the starts run one by one on the sparse Jacobian (the dense
#                    LU of the compiled multi-start loop costs n^3/3 an iteration: at 200 states, as much as
#                    scipy's sparse LU with its Python calls on a chain)


def _start(G, DG_sparse, x0, f_scale):
    """One start of the search on a large system: damped Newton with the sparse Jacobian."""
    state = damped_newton(G, DG_sparse, x0, max_iter=60, rejects=(_Undefined,), singular="lstsq",
                          done=lambda state: state.norm <= 1e-10 * f_scale)
    return state.x


def _accept(refined, f_scale):
    if refined is None:
        return False
    x, step, rn = refined
    return (np.all(np.isfinite(x)) and step <= 1e-6 * max(1.0, float(np.linalg.norm(x)))
            and rn <= 1e-8 * f_scale)


def _same(a, b) -> bool:
    """Points a, b = (x, step) are one equilibrium when closer than their own uncertainty."""
    (xa, sa), (xb, sb) = a, b
    gap = float(np.linalg.norm(xa - xb))
    size = max(1.0, float(np.linalg.norm(xa)), float(np.linalg.norm(xb)))
    return gap <= 1e-11 * size + 10.0 * (sa + sb)


# ---------------------------------------------------------------- the search
def find_equilibria(system: CompiledSystem, p=None, box: dict | None = None, starts: int = 200,
                    exact: bool = True, exact_timeout: float = 3.0, cancel: CancelToken | None = None,
                    progress=None, u0=None, on_numeric=None) -> Equilibria:
    """Equilibria of a flow (fixed points of a map) with their classification, as an ``Equilibria`` list.

    ``box`` ({state: (lo, hi)}, partial allowed) bounds the Newton starts; by default a box around the
    initial values (``u0``, default the model's), the origin and the exact solutions. Raises ValueError
    for a flow whose right-hand side depends on time at these parameter values (equilibria are then
    not defined); a forcing term whose amplitude is zero does not count.

    The exact solve (``exact``, up to EXACT_MAX_STATES states) starts in its child process at once and
    never holds the numeric answer back: ``on_numeric(equilibria)`` is called with the Newton search's
    result as soon as it is there, before the wait for sympy (at most ``exact_timeout`` seconds of its
    computing); the value returned holds the exact refinements. ``refine_exactly`` does the second
    half for a result found with ``exact=False`` (the app: two jobs, the table filled by the first).
    """
    if not system.autonomous_at(p):
        what = "step n" if system.kind == MAP else f"time {system.time_name}"
        raise ValueError(f"the equations depend on the {what}, so the model has no "
                         f"{'fixed points' if system.kind == MAP else 'equilibria'} in the usual sense; "
                         "use a periodic orbit or a Poincaré section instead")
    # each start costs up to 100 Newton steps (see _refine)
    limits.check_steps(100.0 * float(starts), f"{float(starts):,.0f} Newton starts")
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    report = Reporter(progress, cancel)
    notes: list[str] = []
    if system.kind != MAP and system.model.events:
        notes.append("these are equilibria of the equations between events; the model's events "
                     f"({describe_events(system)}) are not considered: an equilibrium beyond an event's boundary "
                     "is not reached by the runs, and a reset can move a solution away from one")
    solve = None
    if exact and system.n_states > EXACT_MAX_STATES:
        notes.append(f"the exact solve is tried for up to {EXACT_MAX_STATES} states; Newton search only")
    elif exact:
        solve = _ExactSolve(system, p)  # runs beside the Newton search: the numeric answer never waits for it
    try:
        numeric = _search(system, p, box, starts, u0, report.part(0.0, 0.7 if solve else 1.0), notes)
        if solve is None:
            return numeric
        if on_numeric is not None:
            on_numeric(numeric)
        return _with_exact(system, p, numeric, solve, exact_timeout, report.part(0.7, 0.3))
    finally:
        if solve is not None:
            solve.close()


def refine_exactly(system: CompiledSystem, equilibria: Equilibria, p=None, timeout: float = 3.0,
                   cancel: CancelToken | None = None, progress=None) -> Equilibria:
    """``equilibria`` (from ``find_equilibria(..., exact=False)`` at the same values) with the exact
    solve's points joined, when sympy answers within ``timeout`` seconds of its computing: the points
    it confirms marked "exact+newton" (with its coordinates), those it adds "exact". A new list; the
    one given is returned as it is for a model beyond EXACT_MAX_STATES states."""
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    if system.n_states > EXACT_MAX_STATES or equilibria.search is None:
        return equilibria
    solve = _ExactSolve(system, p)
    try:
        return _with_exact(system, p, equilibria, solve, timeout, Reporter(progress, cancel))
    finally:
        solve.close()


def _add(found: list, x, step, method) -> None:
    """Join the point x (with its uncertainty ``step``) to ``found`` ([x, step, methods] entries)."""
    for entry in found:
        if _same((entry[0], entry[1]), (x, step)):
            entry[2].add(method)
            if method == EXACT:  # exact coordinates are the better ones
                entry[0], entry[1] = x, step
            return
    found.append([x, step, {method}])


def _search(system, p, box, starts, u0, report, notes) -> "Equilibria":
    n = system.n_states
    G, DG, DG_sparse = _residual_functions(system, p)
    full_box = default_box(system, p, u0)
    for name, (lo, hi) in (box or {}).items():
        if name not in system.states:
            raise KeyError(f"unknown state '{name}' in the search box")
        lo, hi = float(lo), float(hi)
        if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
            raise ValueError(f"the search range of {name} must be finite with low < high")
        full_box[name] = (lo, hi)
    lows = np.array([full_box[s][0] for s in system.states])
    highs = np.array([full_box[s][1] for s in system.states])
    sampler = qmc.LatinHypercube(d=n, seed=12345)
    points = qmc.scale(sampler.random(max(int(starts), 1)), lows, highs) if n > 0 else np.empty((0, 0))
    u_start = system.initial if u0 is None else np.asarray(u0, dtype=float)
    candidates = [np.asarray(u_start, dtype=float)] + list(points)

    f_values = [np.abs(G(np.asarray(c))) for c in candidates[:20] if _safe(G, c) is not None]
    f_scale = max([1.0] + [float(np.max(v)) for v in f_values if np.all(np.isfinite(v))])

    found: list[list] = []  # [x, step, methods set]
    if DG_sparse is None:  # every start in the compiled multi-start loop (dense LU), a status each
        scale = max(1.0, float(np.max(np.abs(np.concatenate([lows, highs])))))
        ends = newton_starts(system, np.array(candidates), p, iterate=1 if system.kind == MAP else 0,
                             max_iter=100, xtol=1e-15, slow=5, bound=1e10 * scale, report=report)
        for x, step, norm in zip(ends.x, ends.step, ends.norm):
            if _accept((x, step, norm), f_scale) and _inside(x, lows, highs):
                _add(found, x, step, NEWTON)
        counts = ends.counts()
    else:  # a large system: start by start, damped Newton on the sparse Jacobian (scipy's sparse LU)
        counts = {}
        for k, x0 in enumerate(candidates):
            report(k / len(candidates))
            try:
                with np.errstate(all="ignore"):
                    refined = _refine(G, DG_sparse, _start(G, DG_sparse, x0, f_scale))
                word = status.OK if _accept(refined, f_scale) else status.STALLED
            except _Undefined:
                refined, word = None, status.UNDEFINED
            except (np.linalg.LinAlgError, ValueError, FloatingPointError):
                refined, word = None, status.SINGULAR
            counts[word] = counts.get(word, 0) + 1
            if word == status.OK and _inside(refined[0], lows, highs):
                _add(found, refined[0], refined[1], NEWTON)
    report(1.0)
    search = _Search(found, full_box, dict(box or {}), u0, counts, list(notes))
    return _results(system, p, search, DG)


@dataclass
class _Search:
    """What a search found, kept on its result so that the exact solve's points can join it later."""

    found: list  # [x, step, methods set]
    box: dict  # the box searched
    given: dict  # the part of it the caller gave
    u0: object
    counts: dict  # status word -> starts
    notes: list


def _with_exact(system, p, numeric: Equilibria, solve: _ExactSolve, timeout, report) -> Equilibria:
    """The numeric result with the exact points joined, when sympy answered in time; the box widened
    to hold them (the parts the caller gave stay)."""
    search = numeric.search
    G, DG, _ = _residual_functions(system, p)
    exact_points, exact_notes = solve.answer(timeout, report)
    found = [[x, step, set(methods)] for x, step, methods in search.found]
    full_box = dict(search.box)
    for x in exact_points:
        try:
            refined = _refine(G, DG, x, max_steps=5)
        except _Undefined:
            refined = None
        # keep the exact coordinates; the refinement only measures their uncertainty
        step = refined[1] if refined is not None and math.isfinite(refined[1]) else 0.0
        _add(found, np.array(x, dtype=float), min(step, 1e-12 * max(1.0, float(np.linalg.norm(x)))), EXACT)
    if exact_points:
        wider = default_box(system, p, search.u0, exact_points)
        full_box = {name: (min(lo, wider[name][0]), max(hi, wider[name][1])) if name not in search.given
                    else (lo, hi) for name, (lo, hi) in full_box.items()}
    report(1.0)
    return _results(system, p, _Search(found, full_box, search.given, search.u0, search.counts,
                                       search.notes + exact_notes), DG)


def _results(system, p, search: _Search, DG) -> Equilibria:
    """The found points classified, sorted, thinned (a continuum), wrapped (angles), as an Equilibria."""
    notes = list(search.notes)
    results = []
    for x, step, methods in sorted(search.found, key=lambda e: tuple(np.round(e[0], 12))):
        method = BOTH if len(methods) == 2 else next(iter(methods))
        # a coordinate within the point's own uncertainty (its last Newton step) of 0 is 0: the origin
        # reached to 1e-32, not printed as -9.9e-32 (zero_round_off does the same beside larger coordinates)
        eq = _equilibrium(system, np.where(np.abs(x) <= step, 0.0, x), method, DG, p)
        if eq is not None:
            results.append(eq)
    results = wrap_equilibria(system, _thin_continuum(results, notes))  # an angle's turns are one point
    if system.delays:  # stability from the characteristic equation of the delays
        from orbitdesk.analyses.delay_stability import with_delay_stability

        results = [with_delay_stability(system, p, eq) for eq in results]
    if not results:
        notes.append("no equilibrium found in the search box")
    out = Equilibria(results, notes, search.box, search.counts)
    out.search = search
    return out


def _singular(eq) -> bool:
    """A zero eigenvalue (a multiplier 1 for a map) at round-off level: the point is not isolated."""
    zero = np.abs(eq.eigenvalues - (1.0 if eq.is_map else 0.0)) <= 1e-9 * max(1.0, float(np.max(np.abs(eq.eigenvalues))))
    return bool(np.any(zero))


def _thin_continuum(results, notes, keep=5, limit=10):
    """Many points with a zero eigenvalue from the Newton search lie on a curve or surface of
    equilibria: list a few of them, say so, and keep every isolated point."""
    def singular(eq):
        return _singular(eq) and eq.method == NEWTON
    loose = [eq for eq in results if singular(eq)]
    if len(loose) <= limit:
        return results
    shown = {id(loose[int(k)]) for k in np.linspace(0, len(loose) - 1, keep).round()}
    message = (f"{len(loose)} of the points found are not isolated (the Jacobian is singular there): the "
               f"equilibria form a curve or surface; {len(shown)} of them are listed")
    if message not in notes:
        notes.append(message)
    return [eq for eq in results if not singular(eq) or id(eq) in shown]


def _inside(x, lows, highs) -> bool:
    margin = 1e-9 * np.maximum(1.0, np.maximum(np.abs(lows), np.abs(highs)))
    return bool(np.all(x >= lows - margin) and np.all(x <= highs + margin))


def _safe(G, x):
    try:
        return G(np.asarray(x, dtype=float))
    except _Undefined:
        return None


def _equilibrium(system, x, method, DG, p=None) -> Equilibrium | None:
    is_map = system.kind == MAP
    try:
        J = DG(x) + (np.eye(x.size) if is_map else 0.0)
    except _Undefined:
        return None
    J = zero_round_off(J)
    kind, stable, ns, nu, nc, warnings, values, vectors = classify(J, is_map)
    stability = ""
    if nc and neutral_point(system, nu, values, p, x):  # normal for a conservative system, not undecided
        kind, stability, note = neutral_words(system, p)
        warnings = [w for w in warnings if "decide" not in w and "Neimark-Sacker" not in w] + [note]
    if system.nonsmooth:
        warnings.append(NONSMOOTH_WARNING.format(names=", ".join(system.nonsmooth)))
    x = zero_round_off(np.where(np.abs(x) < 1e-300, 0.0, x))  # no negative zeros, no 6e-18 for 0
    return Equilibrium({s: float(v) for s, v in zip(system.states, x)}, x, J, values, vectors, kind, stable,
                       ns, nu, nc, method, warnings, is_map, stability)


__all__ = ["Equilibrium", "Equilibria", "find_equilibria", "refine_exactly", "classify", "exact_solutions", "default_box",
           "Cancelled"]
