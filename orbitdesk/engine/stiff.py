"""The stiff methods: scipy's implicit steppers with every step's interpolant held to the tolerance.

scipy's Radau IIA and BDF control the error at the ends of their steps only. On a stiff problem
whose solution is slaved to a slow forcing (a fast lag driven by a sine) they take steps of many
forcing periods: the step ends are right, the polynomial in between is not, and samples or plane
crossings read off it can be wrong by the size of the signal. ``StiffStepper`` therefore checks each
step's interpolant where samples and crossings are read: at interior points it measures the defect
r = p'(t) - f(t, p(t)) and turns it into an error estimate e = (I/h - J)^{-1} r (the integrated
defect for slow components, -J^{-1} r for fast ones, where a stiff component's error is its defect
over its rate). The check is made only on the steps whose interior is read (``reads``: a step that holds
a sample time or a sign change of a plane's function): such a step whose estimate exceeds the tolerance
(rtol |y| + atol) is covered again from its start by shorter steps (a copy of the solver ending at the
step's end, its steps bounded by 1/2 to 1/SHRINK of the failed one, from how far the interpolant missed;
those of its steps that are read are checked the same way). The run then goes on from the accepted long step with the step size the method's own error control
chose after it: the shortening serves the read step only, so a relaxation oscillator's jump through a
plane costs a few dozen extra steps, not a run of short ones.
"""

from __future__ import annotations

import numpy as np

CHECK_AT = (0.1, 0.4, 0.85)  # where inside each step the interpolant is checked (fractions of the step;
#                              near the largest gaps of Radau IIA's cubic through 0, 0.155, 0.645, 1)
SHRINK = 10.0  # a failing step is covered again by steps of at most its length / 2 to its length / SHRINK
ORDER = 4  # the interpolant's error inside a step goes like h^ORDER (Radau IIA's cubic: stage order 3)


class StiffStepper:
    """One scipy stiff solver (``scipy_name``), stepped like an ``OdeSolver`` (``step``, ``t``, ``y``,
    ``t_old``, ``status``, ``dense_output``), whose accepted steps that are read all pass the interpolant
    check. ``reads``: True (every step's interior is read), False (none: step ends only) or a function
    (t_old, y_old, t_new, y_new) -> bool saying whether samples or crossings are read inside that step."""

    def __init__(self, scipy_name: str, fun, jac, t0: float, y0, t_bound: float, rtol: float, atol: float,
                 max_step: float | None = None, reads=True):
        import scipy.integrate  # imported by the stiff path only (a cold start of the others skips it)

        self._fun, self._jac = fun, jac
        self.rtol, self.atol = float(rtol), float(atol)
        self._reads = reads
        self.redone = 0  # steps covered again by shorter ones because their interpolant missed the tolerance
        self.t, self.y, self.t_old = float(t0), np.asarray(y0, dtype=float).copy(), None
        solver = getattr(scipy.integrate, scipy_name)(fun, self.t, self.y, float(t_bound), rtol=self.rtol,
                                                      atol=self.atol, jac=jac,
                                                      max_step=np.inf if not max_step else float(max_step))
        self._stack = [solver]  # the run's solver, then the copies covering a failed step again (innermost last)
        self._last = solver  # the solver whose last step was handed out (its dense output)
        self.status = solver.status

    def _read(self, t_old, y_old, t_new, y_new) -> bool:
        if callable(self._reads):
            return bool(self._reads(t_old, y_old, t_new, y_new))
        return bool(self._reads)

    def step(self):
        while True:
            solver = self._stack[-1]
            t_old, y_old = solver.t, solver.y.copy()
            before = _snapshot(solver) if self._reads is not False else None
            message = solver.step()
            if solver.status == "failed":
                self.status = "failed"
                return message
            h = solver.t - t_old
            if before is None or not self._read(t_old, y_old, solver.t, solver.y):
                break
            miss = self._interpolant_miss(solver, t_old, y_old, h)
            if miss <= 1.0:
                break
            self.redone += 1  # covered again from its start; the accepted long step goes on after it
            before.t_bound = solver.t
            before.max_step = min(before.max_step, abs(h) * _shortening(miss))
            self._stack.append(before)
        self.t_old, self.t, self.y, self._last = t_old, solver.t, solver.y.copy(), solver
        while len(self._stack) > 1 and self._stack[-1].status == "finished":
            self._stack.pop()  # its span is covered: the solver under it has its step's end there
        self.status = "running" if len(self._stack) > 1 else self._stack[0].status
        return message

    def dense_output(self):
        return self._last.dense_output()

    def _interpolant_miss(self, solver, t_old, y_old, h) -> float:
        """The interpolant's largest estimated error over the tolerance at the CHECK_AT points (0: unchecked)."""
        if abs(h) <= 1e-9 * max(1.0, abs(t_old)):
            return 0.0  # shorter steps than this cannot be checked above round-off
        sol = solver.dense_output()
        y_new = solver.y
        size = np.maximum(np.abs(y_old), np.abs(y_new))
        # the slope is a central difference on the polynomial: below ~1e-11 |y| its round-off shows
        scale = np.maximum(self.atol + self.rtol * size, 1e-11 * size)
        n = y_new.size
        delta = 1e-4 * h
        try:
            jac = self._jac(t_old + 0.5 * h, sol(t_old + 0.5 * h))
            defects = np.empty((n, len(CHECK_AT)))
            for k, s in enumerate(CHECK_AT):
                tq = t_old + s * h
                slope = (sol(tq + delta) - sol(tq - delta)) / (2 * delta)
                defects[:, k] = slope - np.asarray(self._fun(tq, sol(tq)), dtype=float)
            errors = _solve_shifted(jac, h, defects)
        except (np.linalg.LinAlgError, ArithmeticError, RuntimeError):  # RuntimeError: SuperLU's singular factor
            return 0.0  # (I/h - J) singular: no estimate; the step's own error control stands
        if not np.all(np.isfinite(errors)):
            return np.inf
        return float(np.max(np.sqrt(np.mean((errors / scale[:, None]) ** 2, axis=0))))


def _shortening(miss: float) -> float:
    """The bound on the steps that cover a step again, as a fraction of its length, from how far its
    interpolant missed: the interpolant's error inside a step shrinks like h^ORDER."""
    return min(1.0 / 2, max(1.0 / SHRINK, 0.8 * miss ** (-1.0 / ORDER)))


def _solve_shifted(jac, h, rhs):
    """(I/h - J)^{-1} rhs for a dense or sparse (SuperLU) Jacobian, all columns with one factorisation."""
    import scipy.sparse

    n = rhs.shape[0]
    if scipy.sparse.issparse(jac):
        from scipy.sparse.linalg import splu

        return splu(scipy.sparse.identity(n, format="csc") / h - scipy.sparse.csc_matrix(jac)).solve(rhs)
    return np.linalg.solve(np.eye(n) / h - np.asarray(jac, dtype=float).reshape(n, n), rhs)


def _snapshot(solver):
    """A copy of a scipy solver's state to step again from (its arrays copied: BDF updates some in place)."""
    copy = object.__new__(type(solver))
    copy.__dict__.update({k: (v.copy() if isinstance(v, np.ndarray) else v) for k, v in solver.__dict__.items()})
    return copy


def solve_at(scipy_name: str, fun, jac, t0: float, y0, t1: float, rtol: float, atol: float, grid,
             report=None, max_step: float | None = None):
    """The solution at the times ``grid`` (increasing towards t1, the last may be t1) by a checked
    stiff stepper; (values (len(y0), len(grid)), steps, None) or (values so far, steps, the failure)."""
    grid = np.asarray(grid, dtype=float)
    direction = 1.0 if t1 >= t0 else -1.0
    keys = grid * direction  # increasing

    def reads(t_old, y_old, t_new, y_new):  # a grid time inside the step: read off its interpolant
        return np.searchsorted(keys, t_new * direction, side="left") > \
            np.searchsorted(keys, t_old * direction, side="right")

    inside = bool(np.any((grid - t1) * direction < 0))
    stepper = StiffStepper(scipy_name, fun, jac, t0, y0, t1, rtol, atol, max_step, reads=reads if inside else False)
    out, k, steps = [], 0, 0
    while stepper.status == "running" and k < grid.size:
        message = stepper.step()
        steps += 1
        if stepper.status == "failed":
            return _columns(out, len(y0)), steps, message or "the step size collapsed"
        if not np.all(np.isfinite(stepper.y)):
            return _columns(out, len(y0)), steps, "the solution is not a number"
        j = k
        while j < grid.size and (grid[j] - stepper.t) * direction <= 0:
            j += 1
        if j > k:
            values = np.asarray(stepper.dense_output()(grid[k:j]), dtype=float).reshape(len(y0), -1)
            out.extend(values.T)
            k = j
        if report is not None:
            report((stepper.t - t0) / (t1 - t0))
    return _columns(out, len(y0)), steps, None


SPARSE_FROM = 30  # states from which the stiff solvers get the Jacobian as a sparse matrix (SuperLU)


def model_functions(system, p, which: int = 0, sensitivity: bool = False):
    """(fun, jac) of the model for the stiff steppers, on its kernels (``codegen.py``): ``fun(t, z)`` the
    compiled right-hand side when the model's kernels are compiled (their plain-Python twin until then),
    with ``which`` tangent vectors the variational equations too (z = (u, V), V n x which row by row;
    ``sensitivity``: the first N_PARAMS of them forced by df/dp, compiled.sensitivity_kernel);
    ``jac(t, z)`` the Jacobian's structural entries (``jac_values``, each equation differentiated only by
    the states it holds) as a sparse matrix from SPARSE_FROM states on, dense below (for the tangent
    columns the same J in each block, their dependence on u left out: it serves Newton's iteration
    only). An undefined value raises UndefinedValue."""
    from orbitdesk.engine import compiled
    from orbitdesk.system.compiled_system import UNDEFINED_ERRORS, UndefinedValue

    engine = compiled.engine_for(system)
    kernels, evaluate = engine.kernels, engine.entry("evaluate")
    f = compiled.sensitivity_kernel(engine, system) if sensitivity else engine.f
    n = system.n_states
    size = n * (which + 1)
    p = np.ascontiguousarray(p, dtype=float)
    p_list = p.tolist()
    rows, cols = np.asarray(kernels.JAC_ROWS, dtype=np.int64), np.asarray(kernels.JAC_COLS, dtype=np.int64)
    all_rows, all_cols = rows, cols
    if which:  # block diagonal: J for u, kron(J, I) for V stored row by row
        all_rows = np.concatenate([rows, (n + rows[:, None] * which + np.arange(which)[None, :]).ravel()])
        all_cols = np.concatenate([cols, (n + cols[:, None] * which + np.arange(which)[None, :]).ravel()])
    values = np.empty(rows.size)
    sparse = size >= SPARSE_FROM
    if sparse:
        import scipy.sparse

    def fun(t, z):
        z = np.ascontiguousarray(z, dtype=float)
        out = np.empty(size)
        evaluate(f, which, float(t), z, p, out)
        if not np.isfinite(out).all():
            raise UndefinedValue(system.explain_undefined(t, z[:n], p)
                                 or f"an expression is undefined at {system.time_name} = {t:.6g}")
        return out

    def jac(t, z):
        try:
            kernels.jac_values(float(t), np.asarray(z[:n], dtype=float).tolist(), p_list, values)
        except UNDEFINED_ERRORS:
            values[:] = np.nan
        if not np.isfinite(values).all():
            raise UndefinedValue(f"the Jacobian is undefined at {system.time_name} = {t:.6g}")
        data = np.concatenate([values, np.repeat(values, which)]) if which else values.copy()
        if sparse:
            return scipy.sparse.csc_matrix((data, (all_rows, all_cols)), shape=(size, size))
        dense = np.zeros((size, size))
        dense[all_rows, all_cols] = data
        return dense

    return fun, jac


def tangent_run(system, scipy_name: str, t0: float, t1: float, keep_from: float, u0, V0, p, interval: float,
                rtol: float, atol: float, bound: float = 1e10, max_rows: int = 5000, report=None):
    """Lyapunov sums of a flow by a stiff method, as ``drivers.flow_tangent`` gives them for the explicit
    ones: the state with the tangent vectors V0 (n x m) from t0 to t1, re-orthonormalised every
    ``interval`` by the loops' own Gram-Schmidt (``tangent.renormalise``), the logarithms of the
    stretches summed after ``keep_from``. Each interval is one checked stiff run of the variational
    equations (``model_functions`` with m tangent vectors) ending on the renormalisation time."""
    from orbitdesk.engine import compiled
    from orbitdesk.engine.drivers import TangentOutput
    from orbitdesk.engine.progress import Cancelled
    from orbitdesk.engine.status import C_CANCELLED, C_DIVERGED, C_STEP_FAILED, C_UNDEFINED
    from orbitdesk.engine.tangent import renormalise

    u = np.asarray(u0, dtype=float).copy()
    V = np.asarray(V0, dtype=float).copy()
    n, m = V.shape
    p = np.asarray(p, dtype=float)
    fun, jac = model_functions(system, p, m)
    loops = compiled.engine_for(system).loops  # the engine model_functions runs on: its renormalisation
    sums, averaged, logs = np.zeros(m), 0.0, np.empty(m)
    count = max(1.0, abs(t1 - keep_from) / interval)
    stride = max(1, int(np.ceil(count / max_rows)))
    rows, row_t = [], []
    t, k, code, note = float(t0), 0, 0, ""
    while t < t1 - 1e-12 * max(1.0, abs(t1)):
        t_next = min(t + interval, t1)
        if t1 - t_next < 1e-9 * interval:
            t_next = t1
        with np.errstate(all="ignore"):
            values, _, failure = solve_at(scipy_name, fun, jac, t, np.concatenate([u, V.ravel()]), t_next, rtol, atol,
                                          [t_next])
        if failure is not None or values.shape[1] != 1 or not np.all(np.isfinite(values)):
            code, note = C_STEP_FAILED, f"the stiff method stopped near {system.time_name} = {t:.6g}: " \
                f"{failure or 'not a number'}"
            break
        z = values[:, 0]
        u, V = z[:n], z[n:].reshape(n, m)
        if float(np.max(np.abs(u))) > bound:
            code = C_DIVERGED
            break
        V = V.copy()  # C-contiguous and writable: the one renormalisation works in place
        if not renormalise(loops, V, logs):
            code, note = C_UNDEFINED, f"a tangent vector collapsed near {system.time_name} = {t_next:.6g}"
            break
        if t_next > keep_from:
            span = t_next - max(t, keep_from)
            sums += logs * (span / (t_next - t))
            averaged += span
            k += 1
            if k % stride == 0:
                rows.append(sums / averaged)
                row_t.append(t_next)
        t = t_next
        if report is not None:
            try:
                report((t - t0) / (t1 - t0))
            except Cancelled:
                code = C_CANCELLED
                break
    if averaged > 0 and (not row_t or row_t[-1] != t):
        rows.append(sums / averaged)
        row_t.append(t)
    return TangentOutput(sums, averaged, np.array(rows, dtype=float).reshape(-1, m), np.array(row_t, dtype=float),
                         int(code), float(t), u.copy(), note, V=V.copy())


def _columns(rows, n):
    return np.array(rows, dtype=float).reshape(-1, n).T if rows else np.empty((n, 0))


def spectral_radius(system, p, states) -> float:
    """The largest |eigenvalue| of the Jacobian over the given states (columns): the fastest rate."""
    rates = [0.0]
    for u in np.asarray(states, dtype=float).T:
        try:
            rates.append(float(np.max(np.abs(np.linalg.eigvals(system.jac(0.0, u, p))))))
        except (ArithmeticError, np.linalg.LinAlgError, ValueError):
            continue
    return max(rates)


STIFF_STEPS = 20000  # an explicit run shorter than this is cheap whatever holds its step back
STIFF_REACH = 4.0  # mean step x fastest rate above which the default method's step is held by stability


def looks_stiff(system, p, run, min_steps: int = STIFF_STEPS) -> bool:
    """Whether an explicit run was held back by stability rather than accuracy, enough for the implicit
    method to pay: its step size collapsed, or it took more than ``min_steps`` steps and its mean step
    times the fastest rate along it (spectral radius of the Jacobian at 40 of its samples) is above
    STIFF_REACH. The default method (Dormand-Prince 8) is stable to about 6 along the negative real
    axis (Hairer and Wanner, Solving ODEs II, section IV.2; from memory): a run held back by stability
    sits near that bound, while accuracy alone keeps a non-stiff run below it (Lorenz at r = 30
    reaches 1.6 at rtol 1e-6 and 3.3 at rtol 1e-3, measured), so the threshold lies between."""
    if run.status == "step_failed":
        return True
    if run.time.size < 2 or run.steps_taken < max(min_steps, 10):
        return False
    mean_step = abs(float(run.time[-1] - run.time[0])) / run.steps_taken
    picks = np.linspace(0, run.time.size - 1, min(40, run.time.size)).astype(int)
    return mean_step * spectral_radius(system, p, run.states[:, picks]) > STIFF_REACH


__all__ = ["StiffStepper", "looks_stiff", "model_functions", "solve_at", "spectral_radius", "tangent_run",
           "SPARSE_FROM"]
