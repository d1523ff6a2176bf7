"""Python-side drivers of the compiled loops: buffers, pauses for progress and cancel, results.

Every call into a loop passes the same argument types, so each loop is compiled once per model
(``warm_up`` compiles them all, or loads them from the cache). The loops pause every
``PAUSE_STEPS`` steps; between pauses the driver reports progress (which raises ``Cancelled`` when
the user cancels) and empties full output buffers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.engine import limits
from orbitdesk.engine.progress import Cancelled
from orbitdesk.engine.explicit_rk import KINDS, PAUSED, WORK_ROWS
from orbitdesk.engine.members import MS_ROWS, R_ACC, R_GIVE_UP, R_ID, R_REJ, R_T
from orbitdesk.engine.methods import method as method_info
from orbitdesk.engine.status import C_CANCELLED, C_STEP_FAILED

PAUSE_STEPS = 512
MEMBER_PAUSE_STEPS = 5_000  # ensembles: steps between pauses (summed over members)
MEMBER_PAUSE_CAP = 500_000  # compiled fixed-step members: at most this many (_member_budget)
# a run whose pace would need more steps than the step limit (limits.py; judged after STEP_CHECK_AFTER
# steps) ends with step_failed: a solution sliding along a kink (sign, abs, if) otherwise steps for days
STEP_CHECK_AFTER = 100_000
SLOW_WINDOWS = 16  # pauses in a row at a pace beyond the limit
_BUFFER = 4096


@dataclass
class FlowOutput:
    time: np.ndarray  # (K,)
    states: np.ndarray  # (n, K)
    code: int  # status code (status.py)
    t: float  # where the run ended
    y: np.ndarray  # state there (the last good one)
    steps: int
    rejected: int
    event_t: np.ndarray = field(default_factory=lambda: np.empty(0))
    event_y: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))  # (n, M)
    event_k: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=np.int64))
    note: str = ""  # why the run stopped early, when the code alone does not say


def _arg(a, dtype=float):
    """``a`` as the loops take it: C-contiguous and writable (a copy when a view is read-only, e.g. from
    np.broadcast_to), so every call passes the same argument types and each loop compiles once."""
    return np.require(a, dtype, ("C", "W"))


def _no_planes(n):
    return (np.empty((0, n + 1)), np.empty(0, dtype=np.int64), np.empty(0, dtype=np.bool_))


def _step_options(name, rtol, atol, max_step, dt):
    info = method_info(name)
    kind = KINDS[info.tableau]
    if info.adaptive:
        return kind, 1, float(rtol), float(atol), float(max_step) if max_step else math.inf
    return kind, 0, 1.0, 1.0, float(dt)


def flow_run(engine, name, t0, t1, y0, p, rtol=1e-8, atol=1e-10, max_step=None, dt=0.01, bound=1e10,
             grid=None, every_step=False, planes=None, report=None, which=0, kernel=None) -> FlowOutput:
    """Integrate from t0 to t1 with the method ``name``: samples at ``grid`` (read off the dense
    output) or every step's end; crossings of ``planes`` = (rows [normal..., value], directions,
    terminal flags). ``kernel``: another kernel of the model with ``model``'s arguments (the
    sensitivity equations, compiled.sensitivity_kernel) in place of ``engine.f``."""
    kind, adaptive, rtol, atol, max_step = _step_options(name, rtol, atol, max_step, dt)
    y = np.array(y0, dtype=float)
    n = y.size
    p = _arg(p)
    K = np.zeros((16, n))
    F = np.zeros((7, n))
    W = np.zeros((WORK_ROWS, n))
    st = np.zeros(12)
    st[0] = t0
    grid = np.empty(0) if grid is None else _arg(grid)
    if every_step:
        out_t, out_y = np.empty(_BUFFER), np.empty((_BUFFER, n))
    else:
        out_t, out_y = np.empty(grid.size), np.empty((grid.size, n))
    rows, dirs, terminal = _no_planes(n) if planes is None else (
        _arg(planes[0]), _arg(planes[1], np.int64),
        _arg(planes[2], np.bool_))
    ev_t, ev_y, ev_k = np.empty(256), np.empty((256, n)), np.empty(256, dtype=np.int64)
    steps_t, steps_y, events = [], [], []
    span = t1 - t0
    note = ""
    pace = _Pace(t0, t1, engine.compiled)
    advance = engine.entry("erk_advance")
    f = engine.f if kernel is None else kernel
    while True:
        code = advance(f, kind, which, adaptive, y, p, K, F, W, st, float(t1), rtol, atol, max_step,
                       float(bound), grid, out_t, out_y, bool(every_step), rows, dirs, terminal,
                       ev_t, ev_y, ev_k, PAUSE_STEPS)
        if every_step and st[5]:
            steps_t.append(out_t[:int(st[5])].copy())
            steps_y.append(out_y[:int(st[5])].copy())
            st[5] = 0
        if st[7]:
            m = int(st[7])
            events.append((ev_t[:m].copy(), ev_y[:m].copy(), ev_k[:m].copy()))
            st[7] = 0
        if code != PAUSED:
            break
        code, note = _paused(pace, st, report, t0, span)
        if code != PAUSED:
            break
    if every_step:
        time = np.concatenate([[t0]] + steps_t)
        states = np.concatenate([y0[None, :]] + steps_y).T if steps_y else np.asarray(y0, float)[:, None].copy()
    else:
        count = int(st[6])
        time, states = out_t[:count], out_y[:count].T
    out = FlowOutput(time, states, int(code), float(st[0]), y, int(st[2]), int(st[3]), note=note)
    if events:
        out.event_t = np.concatenate([e[0] for e in events])
        out.event_y = np.concatenate([e[1] for e in events]).T
        out.event_k = np.concatenate([e[2] for e in events])
    else:
        out.event_y = np.empty((n, 0))
    return out


def _paused(pace, st, report, t0, span):
    """At a pause of a flow loop: (PAUSED, "") to go on, or the code that ends the run and why (too slow
    a pace: step_failed with the reason; cancelled by the user)."""
    note = pace.check(st)
    if note:
        return C_STEP_FAILED, note
    if report is not None:
        try:
            report((st[0] - t0) / span)
        except Cancelled:
            return C_CANCELLED, ""
    return PAUSED, ""


class ExplicitStepper:
    """An explicit method of the compiled loop taken one accepted step at a time, with each step's
    dense output: the interface of scipy's ``OdeSolver`` (``step``, ``t``, ``y``, ``t_old``,
    ``status``, ``dense_output``) that ``StiffStepper`` shares, for runs whose events are Python
    functions (runs.py locates them on the dense output). ``code`` is the status code of a failure."""

    def __init__(self, engine, name, t0, y0, t_bound, p, rtol=1e-8, atol=1e-10, max_step=None, dt=0.01,
                 bound=1e10):
        self.kind, self.adaptive, self.rtol, self.atol, self.max_step = _step_options(name, rtol, atol, max_step, dt)
        self.engine, self.bound = engine, float(bound)
        self.y = np.array(y0, dtype=float)
        n = self.y.size
        self.p = _arg(p)
        self.K, self.F, self.W, self.st = np.zeros((16, n)), np.zeros((7, n)), np.zeros((WORK_ROWS, n)), np.zeros(12)
        self.t, self.t_old, self.t_bound = float(t0), None, float(t_bound)
        self.st[0] = self.t
        self.status, self.code = "running", 0
        self._grid, self._out_t, self._out_y = np.empty(0), np.empty(0), np.empty((0, n))
        self._planes = _no_planes(n)
        self._ev = (np.empty(1), np.empty((1, n)), np.empty(1, dtype=np.int64))
        self._y_old, self._f_old, self._stages = self.y.copy(), np.zeros(n), np.zeros((16, n))
        self._advance = engine.entry("erk_advance")
        engine.loops.evaluate(engine.f, 0, self.t, self.y, self.p, self.K[0])
        if abs(self.t_bound - self.t) <= 1e-13 * max(1.0, abs(self.t_bound)):
            self.status = "finished"

    def step(self):
        """One accepted step (or the failure that stopped it: status "failed", ``code``)."""
        self._y_old[:] = self.y
        self._f_old[:] = self.K[0]
        t_old = self.t
        rows, dirs, terminal = self._planes
        code = self._advance(
            self.engine.f, self.kind, 0, self.adaptive, self.y, self.p, self.K, self.F, self.W, self.st, self.t_bound,
            self.rtol, self.atol, self.max_step, self.bound, self._grid, self._out_t, self._out_y, False, rows, dirs,
            terminal, *self._ev, 1)
        if code not in (0, PAUSED):
            self.status, self.code = "failed", int(code)
            return None
        self.t_old, self.t = t_old, float(self.st[0])
        if code == 0:
            self.status = "finished"
        return None

    def dense_output(self):
        """The last step's dense output: ``sol(t)`` (n,) for a time, (n, k) for k times."""
        t0, h = self.t_old, self.t - self.t_old
        y0 = self._y_old.copy()
        stages = self._stages
        stages[:] = self.K
        stages[0] = self._f_old  # the step's first stage (erk_advance moved f at its end there)
        F = np.zeros_like(self.F)
        loops, kind = self.engine.loops, self.kind
        loops.erk_dense_prepare(self.engine.f, kind, 0, t0, y0, self.y.copy(), h, self.p, stages, F)

        def sol(tq):
            xs = np.atleast_1d(np.asarray((np.asarray(tq, dtype=float) - t0) / h, dtype=float))
            out = np.empty((xs.size, y0.size))
            loops.erk_dense_at(kind, F, y0, _arg(xs), out)
            return out[0] if np.ndim(tq) == 0 else out.T

        return sol


class _Pace:
    """Judges a run's pace at each pause: it ends (a plain-words reason) when the steps it still needs
    exceed the step limit (limits.step_limit: smaller when the loops run as plain Python), at the pace
    of the last SLOW_WINDOWS pauses (a solution that starts sliding along a jump late in the run) or,
    after STEP_CHECK_AFTER steps, of the whole run. Runs, tangent runs and each ensemble member."""

    def __init__(self, t0, t1, compiled=True):
        self.t0, self.t1, self.compiled = float(t0), float(t1), bool(compiled)
        self.last_t, self.last_taken, self.slow = float(t0), 0.0, 0

    def check(self, st) -> str:
        taken, t, limit = st[2] + st[3], st[0], limits.step_limit(self.compiled)
        window, advanced = taken - self.last_taken, abs(t - self.last_t)
        self.last_t, self.last_taken = t, taken
        remaining = abs(self.t1 - t)
        needed = window * remaining / advanced if advanced > 0 else (math.inf if remaining > 0 else 0.0)
        self.slow = self.slow + 1 if needed > limit else 0
        done = abs(t - self.t0)
        if self.slow >= SLOW_WINDOWS:
            projected = taken + needed
        elif taken >= STEP_CHECK_AFTER:
            projected = taken * abs(self.t1 - self.t0) / done if done > 0 else math.inf
        else:
            return ""
        if projected <= limit:
            return ""
        return (f"the run stopped after {int(taken):,} steps at t = {t:.6g}: at this pace it would need about "
                f"{projected:.2g} steps ({limits.step_limit_words(self.compiled)}). The "
                "solution may be sliding along a kink or jump of the model (abs, sign, heaviside, mod, floor, if) "
                "where the right side switches back and forth, or the system is stiff: try the stiff method, a "
                "looser tolerance or a shorter run")


def map_run(engine, n0, n_end, y0, p, bound=1e10, report=None):
    """Iterates n0+1 .. n_end of a map: (states (n, K+1) with the start first, status code)."""
    y = np.array(y0, dtype=float)
    n = y.size
    total = int(n_end) - int(n0)
    out = np.empty((total + 1, n))
    out[0] = y
    view = out[1:]
    st = np.zeros(12)
    st[0] = n0
    p = _arg(p)
    while True:
        code = engine.loops.map_advance(engine.f, y, p, st, int(n_end), view, float(bound), 65536)
        if code != PAUSED:
            break
        if report is not None:
            try:
                report((st[0] - n0) / max(total, 1))
            except Cancelled:
                code = C_CANCELLED
                break
    return out[:int(st[5]) + 1].T, int(code)


@dataclass
class TangentOutput:
    sums: np.ndarray  # (m,) summed logarithms over the averaged span
    averaged: float  # time (flows) or steps (maps) averaged over
    rows: np.ndarray  # (R, m) running estimates
    row_t: np.ndarray  # (R,)
    code: int
    t: float  # where it ended
    y: np.ndarray
    note: str = ""  # why the run stopped early, when the code alone does not say
    V: np.ndarray | None = None  # (n, m) the tangent vectors where it ended (a following run starts from them)


def flow_tangent(engine, name, t0, t1, keep_from, u0, V0, p, interval, rtol=1e-9, atol=1e-12,
                 max_step=None, dt=0.01, bound=1e10, max_rows=5000, report=None) -> TangentOutput:
    """Lyapunov sums of a flow: the state with the tangent vectors V0 (n x m) from t0 to t1,
    re-orthonormalised every ``interval``, logarithms summed after ``keep_from``."""
    kind, adaptive, rtol, atol, max_step = _step_options(name, rtol, atol, max_step, dt)
    n, m = V0.shape
    z = np.concatenate([np.asarray(u0, float), np.asarray(V0, float).ravel()])
    p = _arg(p)
    K = np.zeros((16, z.size))
    F = np.zeros((7, z.size))
    st = np.zeros(14)
    st[0] = t0
    sums = np.zeros(m)
    count = max(1.0, abs(t1 - keep_from) / interval)
    stride = max(1, math.ceil(count / max_rows))
    rows, row_t = np.empty((max_rows + 2, m)), np.empty(max_rows + 2)
    note, pace = "", _Pace(t0, t1, engine.compiled)
    while True:
        code = engine.loops.flow_tangent(engine.f, kind, adaptive, z, p, K, F, st, float(t1), rtol, atol, max_step, float(bound),
                                   float(interval), int(m), sums, float(keep_from), rows, row_t, int(stride), 64)
        if code != PAUSED:
            break
        code, note = _paused(pace, st, report, t0, t1 - t0)
        if code != PAUSED:
            break
    r = int(st[9])
    return TangentOutput(sums, float(st[10]), rows[:r].copy(), row_t[:r].copy(), int(code), float(st[0]), z[:n].copy(),
                         note,
                         V=z[n:].reshape(n, m).copy())


def map_tangent(engine, n0, n_end, keep_from, u0, V0, p, bound=1e10, max_rows=5000, report=None) -> TangentOutput:
    V0 = np.asarray(V0, dtype=float)
    n, m = V0.shape
    z = np.concatenate([np.asarray(u0, float), V0.ravel()])
    p = _arg(p)
    st = np.zeros(12)
    st[0] = n0
    sums = np.zeros(m)
    stride = max(1, math.ceil(max(1, n_end - keep_from) / max_rows))
    rows, row_t = np.empty((max_rows + 2, m)), np.empty(max_rows + 2)
    while True:
        code = engine.loops.map_tangent(engine.f, z, int(m), p, st, int(n_end), int(keep_from), sums, float(bound),
                                        rows, row_t, int(stride), 65536)
        if code != PAUSED:
            break
        if report is not None:
            try:
                report((st[0] - n0) / max(1, n_end - n0))
            except Cancelled:
                code = C_CANCELLED
                break
    r = int(st[9])
    return TangentOutput(sums, float(st[8]), rows[:r].copy(), row_t[:r].copy(), int(code), float(st[0]), z[:n].copy(),
                         V=z[n:].reshape(n, m).copy())


def map_pair(engine, n0, n_end, keep_from, u0, direction, p, d0, every=1, bound=1e10, max_rows=5000,
             report=None) -> TangentOutput:
    """The largest exponent of a map from two nearby orbits (``maps.map_pair``): the reference from
    ``u0`` at step n0, the companion ``d0`` away along ``direction`` from ``keep_from`` on, pulled back
    every ``every`` steps; ``sums`` (1,) the summed logarithms over ``averaged`` steps, ``code`` a status
    code or ``maps.MERGED``; cancel (``report`` raising Cancelled) ends it with C_CANCELLED."""
    a = np.array(u0, dtype=float)
    b = np.array(direction, dtype=float)
    p = np.ascontiguousarray(p, dtype=float)
    st = np.zeros(12)
    st[0] = n0
    runs = max(1, math.ceil(max(1, int(n_end) - int(keep_from)) / max(1, int(every))))
    stride = max(1, math.ceil(runs / max_rows))
    rows, row_t = np.empty((max_rows + 2, 1)), np.empty(max_rows + 2)
    pair = engine.entry("map_pair")
    while True:
        code = pair(engine.f, a, b, p, st, int(n_end), int(keep_from), float(d0), max(1, int(every)), float(bound),
                    rows, row_t, int(stride), 16384)
        if code != PAUSED:
            break
        if report is not None:
            try:
                report((st[0] - n0) / max(1, int(n_end) - int(n0)))
            except Cancelled:
                code = C_CANCELLED
                break
    r = int(st[9])
    return TangentOutput(st[1:2].copy(), float(st[2]), rows[:r].copy(), row_t[:r].copy(), int(code), float(st[0]),
                         a)


@dataclass
class MembersOutput:
    states: np.ndarray  # (n, N) where each member ended (a stopped member: its last good state)
    codes: np.ndarray  # (N,) status codes
    t: np.ndarray  # (N,) where each member ended
    steps: np.ndarray  # (N,) accepted steps
    samples: np.ndarray | None  # (n, N, K) at the grid times, NaN where a member never got there
    event_t: np.ndarray | None  # (N, E) crossing times, NaN beyond ev_count
    event_y: np.ndarray | None  # (n, N, E)
    event_count: np.ndarray | None  # (N,)
    log_sums: np.ndarray | None = None  # (N, m) summed logarithms of the tangent vectors' stretches after t_keep
    log_span: np.ndarray | None = None  # (N,) the time they cover
    notes: dict = field(default_factory=dict)  # member index -> why it stopped early, when the code alone does not say


def _member_rows(U0, P, tangents):
    """(members' rows z = (u, V) (N x n(m+1)), parameter rows (1 or N), n, m) for the member loops;
    ``tangents`` is m (the first m columns of the identity) or an (n, m) start."""
    U = np.asarray(U0, dtype=float).T
    N, n = U.shape
    V0 = None
    if not isinstance(tangents, (int, np.integer)):
        V0 = np.asarray(tangents, dtype=float).reshape(n, -1)
    elif tangents:
        V0 = np.eye(n)[:, :int(tangents)]
    m = 0 if V0 is None else V0.shape[1]
    if m:
        U = np.hstack([U, np.repeat(V0.ravel()[None, :], N, axis=0)])
    P = np.asarray(P, dtype=float)
    rows = _arg(P[None, :] if P.ndim == 1 else P.T)
    if rows.shape[1] == 0:
        rows = np.zeros((rows.shape[0], 1))
    return _arg(U), rows, n, m


BLOCK_MEMBERS = 256  # members in flight at most (their stages stay in the cache)


def _block(N, nz, n_params):
    """Work arrays of the members in flight: Z, Pb, K, Y1, ACC, TS, MS, BS (members.members_advance)."""
    B = max(1, min(N, BLOCK_MEMBERS, max(8, 65536 // (17 * nz))))
    return (np.zeros((nz, B)), np.zeros((n_params, B)), np.zeros((16, nz, B)), np.zeros((nz, B)),
            np.zeros((nz, B)), np.zeros(B), np.zeros((MS_ROWS, B)), np.zeros(3))


def _member_budget(work, compiled) -> int:
    """Member-steps between pauses of the lean loop: MEMBER_PAUSE_STEPS, or for a long compiled job a
    64th of it (at most MEMBER_PAUSE_CAP: a few milliseconds), so pausing costs little against steps of
    a few nanoseconds and progress still moves in small parts."""
    if not compiled or not math.isfinite(work):
        return MEMBER_PAUSE_STEPS
    return int(min(MEMBER_PAUSE_CAP, max(MEMBER_PAUSE_STEPS, work / 64)))


def _judge_members(MS, flying, t0, ends, compiled, paces, notes) -> None:
    """Each member in flight judged by its pace as a run is (``_Pace``); one whose pace would need more
    steps than the limit gets MS[R_GIVE_UP] set (the loop stops it with step_failed) and a note. Only
    members whose whole-run pace is past a sixteenth of the limit are looked at one by one."""
    if not flying:
        return
    ids = MS[R_ID, :flying].astype(np.int64)
    taken = MS[R_ACC, :flying] + MS[R_REJ, :flying]
    done = np.abs(MS[R_T, :flying] - t0)
    with np.errstate(all="ignore"):
        projected = np.where(done > 0, taken * np.abs(ends[ids] - t0) / done, np.inf)
    for c in np.flatnonzero(projected > limits.step_limit(compiled) / 16):
        i = int(ids[c])
        pace = paces.setdefault(i, _Pace(t0, ends[i], compiled))
        st = np.zeros(4)
        st[0], st[2], st[3] = MS[R_T, c], MS[R_ACC, c], MS[R_REJ, c]
        note = pace.check(st)
        if note:
            MS[R_GIVE_UP, c] = 1.0
            notes[i] = note.replace("the run stopped", f"member {i + 1} stopped", 1)


def members_run(engine, name, t0, t_end, U0, P, rtol=1e-8, atol=1e-10, max_step=None, dt=0.01, bound=1e10,
                grid=None, planes=None, max_events=0, report=None, t_keep=None, tangents=0,
                interval=1.0, keep_going=False, tangent_samples=False) -> MembersOutput:
    """Run the columns of U0 (n, N) from t0 to t_end (a number or one per member) with parameters
    P ((n_p,) shared or (n_p, N)); samples at ``grid``; the first ``max_events`` crossings of
    ``planes`` per member after ``t_keep`` (then the member stops, or with ``keep_going`` runs on
    to its end). Plane directions: +1, -1, 0 or ``explicit_rk.TURNS_DOWN`` (maxima).

    With ``tangents`` = m > 0 each member carries m tangent vectors (starting as the first m
    columns of the identity, or ``tangents`` columns given as an (n, m) array), re-orthonormalised
    every ``interval``; ``log_sums`` / ``log_span`` are their exponents' sums after ``t_keep``;
    ``tangent_samples``: the samples hold the tangent vectors too (rows n + a m + b: V[a, b]).
    The loop pauses every ``MEMBER_PAUSE_STEPS`` steps for progress and cancel (raising Cancelled);
    there each member's pace is judged as a run's is (``_Pace``): a member that would need more steps
    than the limit (sliding along a kink) stops with step_failed and its reason in ``notes``."""
    kind, adaptive, rtol, atol, max_step = _step_options(name, rtol, atol, max_step, dt)
    U, rows, n, m = _member_rows(U0, P, tangents)
    N, nz = U.shape
    ends = _arg(np.broadcast_to(np.asarray(t_end, dtype=float), (N,)))
    grid = np.empty(0) if grid is None else _arg(grid)
    samples = np.empty((N, grid.size, nz))
    if planes is None:
        plane_rows, dirs, terminal = _no_planes(nz)
    else:
        plane_rows = np.zeros((len(planes[0]), nz + 1))
        given = np.asarray(planes[0], dtype=float)
        plane_rows[:, :n] = given[:, :n]
        plane_rows[:, nz] = given[:, n]
        dirs = _arg(planes[1], np.int64)
        terminal = _arg(planes[2], np.bool_)
    E = max(int(max_events), 1)
    ev_t, ev_y = np.full((N, E), np.nan), np.full((N, E, nz), np.nan)
    ev_count = np.zeros(N)
    codes, t_reached, steps = np.zeros(N, dtype=np.int64), np.zeros(N), np.zeros(N)
    sums = np.zeros((N, m + 1))
    keep = float(t0 if t_keep is None else t_keep)
    work = _block(N, nz, rows.shape[1])
    g = engine.batch
    notes, paces = {}, {}
    outputs = (float(bound), grid, samples, plane_rows, dirs, terminal, ev_t, ev_y, ev_count, codes, t_reached, steps,
               keep, int(m), float(interval), bool(keep_going), sums, *work)
    if not adaptive and N and np.all(ends == ends[0]):  # one step, one end: the lean loop (members_fixed.py)
        advance = engine.entry("members_fixed")
        budget = _member_budget(N * abs(ends[0] - t0) / max_step, engine.compiled)
    else:
        advance, budget = engine.entry("members_advance"), MEMBER_PAUSE_STEPS
    while True:
        code = advance(engine.f, g, kind, adaptive, U, rows, float(t0), ends, rtol, atol, max_step, *outputs, budget)
        if code != PAUSED:
            break
        _judge_members(work[-2], int(work[-1][0]), t0, ends, engine.compiled, paces, notes)
        if report is not None:
            MS, BS = work[-2], work[-1]
            flying = int(BS[0])
            span = np.where(ends[MS[R_ID, :flying].astype(np.int64)] != t0,
                            ends[MS[R_ID, :flying].astype(np.int64)] - t0, 1.0)
            within = np.clip((MS[R_T, :flying] - t0) / span, 0.0, 1.0).sum()
            report((BS[2] + within) / N)  # Cancelled goes to the caller
    count = ev_count.astype(np.int64)
    beyond = np.arange(E)[None, :] >= count[:, None]
    ev_t[beyond] = np.nan
    ev_y[beyond] = np.nan
    return MembersOutput(U[:, :n].T.copy(), codes, t_reached, steps.astype(np.int64),
                         np.moveaxis(samples if tangent_samples else samples[:, :, :n], 2, 0) if grid.size else None,
                         ev_t if planes is not None else None,
                         np.moveaxis(ev_y[:, :, :n], 2, 0) if planes is not None else None,
                         count if planes is not None else None,
                         sums[:, :m] if m else None, sums[:, m] if m else None, notes)


def members_iterate(engine, n0, n_end, keep_from, U0, P, samples=0, bound=1e10, tangents=0,
                    report=None) -> MembersOutput:
    """Iterate the columns of U0 (n, N) of a map from step n0 to ``n_end`` with parameters P
    ((n_p,) shared or (n_p, N)); the first ``samples`` iterates after ``keep_from`` kept; with
    ``tangents`` (m, or an (n, m) start) the tangent vectors' log sums after ``keep_from``
    (``log_span`` counts the steps). The loop pauses for progress and cancel (raising Cancelled)."""
    U, rows, n, m = _member_rows(U0, P, tangents)
    codes, reached, sums, out = iterate_rows(engine, n0, n_end, keep_from, U, rows, m, bound, report, samples)
    return MembersOutput(U[:, :n].T.copy(), codes, reached.astype(float), reached - int(n0),
                         np.moveaxis(out, 2, 0), None, None, None,
                         sums[:, :m] if m else None, sums[:, m] if m else None)


def iterate_rows(engine, n0, n_end, keep_from, Z, rows, m, bound=1e10, report=None, samples=0):
    """The map member loop (``maps.members_iterate``) on rows the caller keeps: iterate the members' rows
    Z = (u, V) (N x n(m+1), C-contiguous, in place) from step n0 to ``n_end`` with the parameter rows
    ``rows`` (1 or N rows), their m tangent vectors re-orthonormalised every step and the logarithms of
    the stretches after ``keep_from`` summed, so a spectrum can be averaged block after block with every
    member's V going on where it stopped (``analyses/lyapunov.map_exponents``). Returns (codes (N,),
    steps reached (N,), sums (N, m + 1): the m sums and the steps they cover, the first ``samples``
    states after ``keep_from`` (N, samples, n)). ``report(fraction)`` is called at pauses (it raises
    Cancelled to stop)."""
    N, nz = Z.shape
    n = nz // (m + 1)
    out = np.empty((N, int(samples), n))
    codes, reached = np.zeros(N, dtype=np.int64), np.zeros(N, dtype=np.int64)
    sums = np.zeros((N, m + 1))
    B = max(1, min(N, BLOCK_MEMBERS))
    work = (np.zeros((nz, B)), np.zeros((rows.shape[1], B)), np.zeros((nz, B)), np.zeros(B),
            np.zeros(B, dtype=np.int64), np.ones((max(m, 1), B)), np.zeros(3 + B))
    total = max(1, N * (int(n_end) - int(n0)))
    while True:
        code = engine.loops.members_iterate(engine.batch, Z, rows, int(n0), int(n_end), int(keep_from), float(bound),
                                            out, codes, reached, int(m), sums, *work, MEMBER_PAUSE_STEPS * 8)
        if code != PAUSED:
            break
        if report is not None:
            BS, KS = work[-1], work[-3]
            flying = int(BS[0])
            report(min(1.0, (BS[2] * (int(n_end) - int(n0)) + float((KS[:flying] - int(n0)).sum())) / total))
    return codes, reached, sums, out


def warm_up(engine) -> None:
    """Compile every loop with the drivers' argument types (or load it from numba's cache)."""
    k = engine.kernels
    n = int(k.N_STATES)
    y0 = np.full(n, 0.5)
    p = np.full(int(k.N_PARAMS), 0.5)
    with np.errstate(all="ignore"):  # the kernel from Python (rhs(), stiff solvers, map sensitivities)
        engine.entry("evaluate")(engine.f, 0, 0.0, y0, p, np.empty(n))
    from orbitdesk.engine.newton_starts import newton_starts  # the multi-start Newton loop

    newton_starts(None, y0[None, :], p, iterate=int(k.IS_MAP), max_iter=1, engine=engine)
    if k.IS_MAP:
        map_run(engine, 0, 1, y0, p)
        map_tangent(engine, 0, 1, 0, y0, np.eye(n), p)
        map_pair(engine, 0, 2, 1, y0, np.ones(n), p, 1e-8)
        members_iterate(engine, 0, 1, 0, y0[:, None], p, samples=1, tangents=1)
        return
    planes = (np.zeros((1, n + 1)), np.zeros(1, dtype=np.int64), np.zeros(1, dtype=np.bool_))
    flow_run(engine, "dop853", 0.0, 1e-9, y0, p, grid=np.array([0.0, 1e-9]), planes=planes)
    flow_tangent(engine, "dop853", 0.0, 1e-9, 0.0, y0, np.eye(n), p, 1e-9)
    # no bound: a model whose right-hand side is huge at the warm-up's state (a constant near 1e300) still
    # takes its step, so the dense output's loops are compiled too
    stepper = ExplicitStepper(engine, "dop853", 0.0, y0, 1e-9, p, bound=math.inf)
    stepper.step()
    if stepper.t_old is None:  # the model is undefined at the warm-up point: its step failed, the dense
        stepper.t_old, stepper.t = 0.0, 1e-9  # output's loops are compiled all the same (on NaN values)
    stepper.dense_output()(5e-10)
    members_run(engine, "dop853", 0.0, 1e-9, y0[:, None], p, grid=np.array([1e-9]), planes=planes, max_events=1)
    members_run(engine, "rk4", 0.0, 1e-9, y0[:, None], p, dt=1e-9, grid=np.array([1e-9]), planes=planes,
                max_events=1, tangents=1)
    if hasattr(k, "sde"):  # a model with noise (engine/stochastic.py)
        from orbitdesk.engine.stochastic import warm_up_sde

        warm_up_sde(engine)


__all__ = ["ExplicitStepper", "FlowOutput", "TangentOutput", "MembersOutput", "flow_run", "map_run", "flow_tangent", "map_tangent", "map_pair",
           "members_run", "members_iterate", "warm_up",
           "PAUSE_STEPS"]
