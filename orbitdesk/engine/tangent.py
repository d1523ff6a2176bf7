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


SMALL_BLOCK = 8  # plain Python: up to this many members, element by element is cheaper than numpy's calls


def _lengths_numpy(S, rows, count):
    """The length of each member's vector whose entries are the given rows of S."""
    s = S[rows[0], :count] * S[rows[0], :count]
    for r in rows[1:]:
        s = s + S[r, :count] * S[r, :count]
    return np.sqrt(s)


def _gram_schmidt_block_numpy(S, first, n, m, norms, count):
    if count <= SMALL_BLOCK:  # each member on Python floats (a list): the same code as compiled, member by member
        failed = 0
        for c in range(count):
            v, lengths = S[first:first + n * m, c].tolist(), [0.0] * m
            good = orthonormal_columns(v, n, m, lengths)
            S[first:first + n * m, c] = v
            norms[:m, c] = lengths if good else 0.0
            failed += not good
        return failed
    with np.errstate(all="ignore"):
        rows = [[first + a * m + j for a in range(n)] for j in range(m)]  # column j's entries, by row of V
        good = np.ones(count, dtype=np.bool_)
        everyone = True  # no member has failed or been left out yet: no masks needed
        for j in range(m):
            before = _lengths_numpy(S, rows[j], count)
            norm = before
            again = good.copy()  # members still in the loop of passes (a failed member is left as it is)
            for _ in range(2):
                whole = everyone and bool(again.all())
                for q in range(j):
                    d = S[rows[q][0], :count] * S[rows[j][0], :count]
                    for a in range(1, n):
                        d = d + S[rows[q][a], :count] * S[rows[j][a], :count]
                    for a in range(n):
                        less = S[rows[j][a], :count] - d * S[rows[q][a], :count]
                        S[rows[j][a], :count] = less if whole else np.where(again, less, S[rows[j][a], :count])
                new = _lengths_numpy(S, rows[j], count)
                norm = new if whole else np.where(again, new, norm)
                stop = (new > 0.5 * before) | (new == 0.0)
                before = new if whole else np.where(again, new, before)
                again &= ~stop
                if not again.any():
                    break
            good &= (norm > 0.0) & np.isfinite(norm)
            everyone = everyone and bool(good.all())
            norms[j, :count] = norm
            for a in range(n):
                S[rows[j][a], :count] = (S[rows[j][a], :count] / norm if everyone else
                                         np.where(good, S[rows[j][a], :count] / norm, S[rows[j][a], :count]))
        if not everyone:
            norms[:, :count][:, ~good] = 0.0
    return int(count - np.count_nonzero(good))


@noref
def orthonormal_columns(v, n, m, norms):
    """Modified Gram-Schmidt of one matrix held by rows in v (V[a, j] = v[a m + j], n x m) in place, with a
    second pass when the first cancels most of a column ("twice is enough"); norms[j] = R's j-th diagonal.
    Returns False when a column collapses (to zero, or not finite), the later columns left as they were."""
    for j in range(m):
        before = 0.0
        for a in range(n):
            before += v[a * m + j] * v[a * m + j]
        before = math.sqrt(before)
        norm = before
        for _ in range(2):
            for q in range(j):
                d = 0.0
                for a in range(n):
                    d += v[a * m + q] * v[a * m + j]
                for a in range(n):
                    v[a * m + j] -= d * v[a * m + q]
            norm = 0.0
            for a in range(n):
                norm += v[a * m + j] * v[a * m + j]
            norm = math.sqrt(norm)
            if norm > 0.5 * before or norm == 0.0:
                break
            before = norm
        if not norm > 0.0 or not math.isfinite(norm):
            return False
        norms[j] = norm
        for a in range(n):
            v[a * m + j] /= norm
    return True


@numpy_version(_gram_schmidt_block_numpy)
@noref
def gram_schmidt_block(S, first, n, m, norms, count):
    """``orthonormal_columns`` of the tangent vectors of members 0 .. count-1 in place: member c's are
    the columns of the n x m matrix V[a, j] = S[first + a m + j, c] (a member loop's block of states
    (u, V) by columns; one matrix as S = V.reshape((n m, 1))); norms[j, c] = R's j-th diagonal. Returns
    how many members' vectors collapsed: their norms[:, c] are 0. Compiled: member by member; plain
    Python: a few members the same way on Python floats, a larger block the same operations in the same
    order on all its members at once with numpy (``_gram_schmidt_block_numpy``): the same numbers."""
    failed = 0
    for c in range(count):
        if not orthonormal_columns(S[first:first + n * m, c], n, m, norms[:, c]):
            for q in range(m):
                norms[q, c] = 0.0
            failed += 1
    return failed


@noref
def gram_schmidt(V, norms):
    """``gram_schmidt_block`` of one matrix V (n x m, C-contiguous) in place; norms[j] = R's j-th
    diagonal. Returns False when a column collapses."""
    n, m = V.shape
    return gram_schmidt_block(V.reshape((n * m, 1)), np.int64(0), n, m, norms.reshape((m, 1)), np.int64(1)) == 0


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


@noref
def pull_back(a, b, d0):
    """The companion orbit ``b`` pulled back in place to distance ``d0`` from the reference ``a`` along
    their separation (Benettin, Galgani & Strelcyn 1976): returns the logarithm of their distance over
    ``d0`` (the growth since the last pull-back), NaN when they met (no separation left to measure).
    The one pull-back of the two-trajectory exponent: maps' loop (maps.map_pair) and, called from
    Python, flows' (analyses/lyapunov.largest_lyapunov_two_trajectory)."""
    dist = 0.0
    for i in range(a.shape[0]):
        dist += (b[i] - a[i]) ** 2
    dist = math.sqrt(dist)
    if not dist > 0.0:
        return math.nan
    for i in range(a.shape[0]):
        b[i] = a[i] + d0 * (b[i] - a[i]) / dist
    return math.log(dist / d0)


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
