"""Tangent vectors along an orbit: variational equations with QR re-orthonormalisation, the
Lyapunov spectrum (Benettin, Galgani, Giorgilli & Strelcyn 1980), for flows and maps.

Flows: the state and m tangent vectors V (n x m) are integrated together by the explicit
Runge-Kutta loop (the model's kernel with ``which = m``: u' = f, V' = J V) over
each renormalisation interval; maps: V -> J(u) V each step. After each interval the columns of V
are re-orthonormalised by modified Gram-Schmidt (a QR factorisation, with a second pass when the
first cancels most of a column) and the logarithms of R's diagonal are summed from ``keep_from``
on. Running estimates go to ``rows`` every ``stride`` renormalisations.

``orthonormalise`` is the one renormalisation of the package: these loops, the member loops
(members.py, members_fixed.py), and from Python (``renormalise``) the stiff methods' tangent runs
(stiff.tangent_run) and the delay models' two-solution exponent (analyses/delay_lyapunov.py).

The model's kernel comes in as an argument, as in ``explicit_rk.py``.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, WORK_ROWS, any_layout, erk_advance, state_code
from orbitdesk.engine.jitting import at, loop, noref, numpy_version


def _column_norm_numpy(V, j):
    v = V[:, j]
    return math.sqrt(float(v @ v))


@numpy_version(_column_norm_numpy)
@noref
def _column_norm(V, j):
    """The length of V's column j."""
    s = 0.0
    for i in range(V.shape[0]):
        s += V[i, j] * V[i, j]
    return math.sqrt(s)


def _project_out_numpy(V, j):
    if j:
        Q = V[:, :j]
        V[:, j] -= Q @ (Q.T @ V[:, j])


@numpy_version(_project_out_numpy)
@noref
def _project_out(V, j):
    """Column j less its projections on the columns before it (orthonormal already): one column at a
    time compiled (modified Gram-Schmidt), all at once with numpy's products in plain Python."""
    n = V.shape[0]
    for q in range(j):
        d = 0.0
        for i in range(n):
            d += V[i, q] * V[i, j]
        for i in range(n):
            V[i, j] -= d * V[i, q]


def _divide_column_numpy(V, j, norm):
    V[:, j] /= norm


@numpy_version(_divide_column_numpy)
@noref
def _divide_column(V, j, norm):
    for i in range(V.shape[0]):
        V[i, j] /= norm


@noref
def gram_schmidt(V, norms):
    """Gram-Schmidt on the columns of V in place, with a second pass when the first cancels most of a
    column ("twice is enough"); norms[j] = R's j-th diagonal. Returns False when a column collapses to
    zero. The same code compiled and in plain Python (its helpers there are numpy's whole columns)."""
    for j in range(V.shape[1]):
        before = _column_norm(V, j)
        norm = before
        for _ in range(2):
            _project_out(V, j)
            norm = _column_norm(V, j)
            if norm > 0.5 * before or norm == 0.0:
                break
            before = norm
        if not norm > 0.0 or not math.isfinite(norm):
            return False
        norms[j] = norm
        _divide_column(V, j, norm)
    return True


@noref
def orthonormalise(V, logs):
    """``gram_schmidt`` with logs[j] = the logarithm of R's j-th diagonal: the one renormalisation of
    tangent vectors (Lyapunov spectra), the compiled loops' (flows, maps, members) and, from Python on
    the engine's loops (``renormalise``), the stiff methods' and the delay models' two-solution exponent."""
    if not gram_schmidt(V, logs):
        return False
    for j in range(V.shape[1]):
        logs[j] = math.log(logs[j])
    return True


def renormalise(loops, V, logs) -> bool:
    """``orthonormalise`` called from Python on ``loops`` (an engine's: compiled, or plain Python with its
    numpy version): V (n x m) re-orthonormalised in place, logs[j] the logarithm of the j-th column's
    stretch; False when a column collapsed (or is not finite). V is made C-contiguous and writable by
    the caller's copy, so the compiled helper keeps its one signature."""
    if not (V.flags.c_contiguous and V.flags.writeable and logs.flags.c_contiguous and logs.flags.writeable):
        raise ValueError("renormalise works in place on C-contiguous writable arrays")
    return bool(loops.orthonormalise(V, logs))


@noref
def _record(sums, span, rows, row_t, st, t):
    r = int(st[9])
    if r < rows.shape[0]:
        for j in range(sums.shape[0]):
            rows[r, j] = sums[j] / span
        row_t[r] = t
        st[9] = r + 1


INTERVAL_STEPS = 4096


@loop
def flow_tangent(f, kind, adaptive, z, p, K, F, st, t_end, rtol, atol, max_step, bound, interval, m,
                 sums, keep_from, rows, row_t, stride, max_intervals):
    """Integrate z = (u, V) from st[0] to ``t_end`` renormalising every ``interval``.

    ``st`` as erk_advance's plus [8] renormalisations done, [9] rows written, [10] time averaged,
    [12] the end of the interval under way, [13] 1 while one is. At most ``max_intervals`` intervals
    and ``INTERVAL_STEPS`` steps of one interval per call (PAUSED after them). Returns a status code."""
    n = z.shape[0] // (m + 1)
    logs = np.empty(m)
    grid = np.empty(0)
    out_t = np.empty(0)
    out_y = np.empty((0, z.shape[0]))
    planes = np.empty((0, z.shape[0] + 1))
    plane_dir = np.empty(0, dtype=np.int64)
    terminal = np.empty(0, dtype=np.bool_)
    ev_t = np.empty(1)
    ev_y = np.empty((1, z.shape[0]))
    ev_k = np.empty(1, dtype=np.int64)
    W = np.empty((WORK_ROWS, z.shape[0]))
    # erk_advance's every_step and step budget as run-time values: numba compiles a called loop anew
    # for literal arguments (False, a global constant), a second copy of the whole stepping loop
    every_step = np.zeros(1, dtype=np.bool_)
    budget = np.full(1, INTERVAL_STEPS)
    direction = 1.0 if t_end > st[0] else -1.0
    done = 0
    while (t_end - st[0]) * direction > 1e-13 * max(1.0, abs(t_end)):
        if done >= max_intervals:
            return PAUSED
        if st[13] == 0.0:  # a new interval: its end is kept in st[12] while it is under way
            target = st[0] + direction * interval
            if (target - t_end) * direction > 0.0 or (t_end - target) * direction <= 1e-9 * interval:
                target = t_end
            st[12], st[13] = target, 1.0
        target = st[12]
        # a budget of steps per call: an interval that needs millions (a solution sliding along a jump)
        # pauses inside, so the driver can judge the pace, report progress and cancel
        code = erk_advance(f, kind, m, adaptive, z, p, K, F, W, st, target, rtol, atol, max_step, bound,
                           grid, out_t, out_y, every_step[0], planes, plane_dir, terminal, ev_t, ev_y, ev_k,
                           budget[0])
        if code == PAUSED:
            return PAUSED
        st[13] = 0.0
        if code != 0:
            return code
        st[0] = target
        V = z[n:].reshape((n, m))
        if not orthonormalise(V, logs):
            return 2
        st[11] = 1.0  # f at the new tangent vectors
        if st[0] * direction > keep_from * direction:
            for j in range(m):
                sums[j] += logs[j]
            st[10] = (st[0] - keep_from) * direction
            st[8] += 1
            if int(st[8]) % stride == 0 or (t_end - st[0]) * direction <= 1e-13 * max(1.0, abs(t_end)):
                _record(sums, st[10], rows, row_t, st, st[0])
        done += 1
        if state_code(any_layout(z[:n]), bound) != 0:
            return state_code(any_layout(z[:n]), bound)
    return 0


@loop
def map_tangent(f, z, m, p, st, n_end, keep_from, sums, bound, rows, row_t, stride, max_steps):
    """Iterate the map with m tangent vectors, z = (u, V) with V (n x m) row by row, from step
    st[0] to ``n_end``; st[8] counts the steps averaged, st[9] the rows written. Returns a status
    code (2 also when the Jacobian is singular on the orbit: a column of V collapsed)."""
    n = z.shape[0] // (m + 1)
    nxt = np.empty(z.shape[0])
    W = nxt[n:].reshape((n, m))
    logs = np.empty(m)
    k = int(st[0])
    steps = 0
    while k < n_end:
        if steps >= max_steps:
            st[0] = k
            return PAUSED
        f(m, float(k), at(z), at(p), at(nxt))
        code = state_code(any_layout(nxt[:n]), bound)
        if code != 0:
            st[0] = k
            return code
        if not orthonormalise(W, logs):  # the Jacobian is singular on the orbit
            st[0] = k
            return 2
        for i in range(z.shape[0]):
            z[i] = nxt[i]
        k += 1
        steps += 1
        if k > keep_from:
            for j in range(m):
                sums[j] += logs[j]
            st[8] += 1
            if int(st[8]) % stride == 0 or k == n_end:
                _record(sums, st[8], rows, row_t, st, float(k))
    st[0] = k
    return 0
