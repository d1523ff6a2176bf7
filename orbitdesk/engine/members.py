"""Many independent members (initial states and/or parameter sets): each member runs the explicit
Runge-Kutta loop with its own step control (``explicit_rk.erk_advance``) in turn, inside one
compiled call. A member that blows up or meets an undefined value stops with its status; the
others go on. Samples on a common grid (strobe times, output times) come off each member's dense
output; plane crossings (sections) and turning points (local maxima) are located there too, from
``t_keep`` on (a transient before it is run without them).

With ``m`` tangent vectors each member's row holds z = (u, V) (V n x m row by row, the kernel's
``which = m``): V is re-orthonormalised every ``interval`` (``tangent.orthonormalise``) and the
logarithms of the stretches after ``t_keep`` are summed per member, the Lyapunov exponents of a
sweep.

The model's kernel comes in as an argument, as in ``explicit_rk.py``.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, erk_advance
from orbitdesk.engine.jitting import loop
from orbitdesk.engine.status import C_STEP_FAILED
from orbitdesk.engine.tangent import orthonormalise


@loop
def members_advance(f, kind, adaptive, U, P, t0, t_end, rtol, atol, max_step, bound, grid, samples,
                    planes, plane_dir, terminal, ev_t, ev_y, ev_count, codes, t_reached, steps,
                    t_keep, m, interval, keep_going, sums, K, F, st, mst, max_steps):
    """Run every row of U (N x n(m+1), in place: the state reached) from t0 to t_end[i] with the
    parameters P[i] (or P[0] for all when P has one row).

    ``samples`` (N, K, n(m+1)): the states at ``grid``; ``ev_t`` (N, E), ``ev_y`` (N, E, n(m+1)): the
    first E crossings of ``planes`` after ``t_keep`` (a member stops once it has E of them, or with
    ``keep_going`` runs on to its end without looking for more); ``ev_count`` how many each has.
    ``codes``, ``t_reached``, ``steps``: per member status code, end time, accepted steps.
    ``sums`` (N, m + 1): the summed logarithms of the m stretches after ``t_keep`` and the time they
    cover (tangent vectors renormalised every ``interval``).

    Returns 0 when every member is done, or PAUSED after about ``max_steps`` steps: ``K``, ``F``,
    ``st`` (erk_advance's) and ``mst`` ([member, started, sampling, full, crossings, interval start,
    give up]) hold where it stopped and the next call goes on from there (mst zero at the first call).
    The caller sets mst[6] at a pause to stop the member under way with C_STEP_FAILED (its pace would
    need more steps than the limit: drivers._Pace)."""
    N, nz = U.shape
    n = nz // (m + 1)
    out_t = np.empty(grid.shape[0])
    ev_k = np.empty(ev_t.shape[1], dtype=np.int64)
    no_planes = np.empty((0, nz + 1))
    no_dir = np.empty(0, dtype=np.int64)
    no_terminal = np.empty(0, dtype=np.bool_)
    spare_t = np.empty(1)
    spare_y = np.empty((1, nz))
    spare_k = np.empty(1, dtype=np.int64)
    logs = np.empty(max(m, 1))
    shared = P.shape[0] == 1
    used = 0
    i = int(mst[0])
    while i < N:
        p = P[0] if shared else P[i]
        end = t_end[i]
        direction = 1.0 if end > t0 else -1.0
        if mst[1] == 0.0:  # a member starts
            st[:] = 0.0
            st[0] = t0
            mst[1] = 1.0
            mst[2] = 0.0 if (t_keep - t0) * direction > 0.0 else 1.0
            mst[3] = 0.0
            mst[4] = 0.0
            mst[5] = t0
            mst[6] = 0.0
        code = 0
        while (end - st[0]) * direction > 1e-13 * max(1.0, abs(end)):
            if used >= max_steps:
                return PAUSED
            if mst[6] != 0.0:  # the caller gave up on this member at the pause
                mst[6] = 0.0
                code = C_STEP_FAILED
                break
            sampling = mst[2] != 0.0
            full = mst[3] != 0.0
            target = end
            if not sampling and (target - t_keep) * direction > 0.0:
                target = t_keep
            if m > 0 and (target - (mst[5] + direction * interval)) * direction > 1e-9 * interval:
                target = mst[5] + direction * interval
            before = st[2] + st[3]
            if sampling and not full:
                code = erk_advance(f, kind, m, adaptive, U[i], p, K, F, st, target, rtol, atol, max_step, bound,
                                   grid, out_t, samples[i], False, planes, plane_dir, terminal, ev_t[i], ev_y[i],
                                   ev_k, max_steps - used)
                mst[4] = st[7]
            else:
                st[7] = 0.0
                code = erk_advance(f, kind, m, adaptive, U[i], p, K, F, st, target, rtol, atol, max_step, bound,
                                   grid, out_t, samples[i], False, no_planes, no_dir, no_terminal, spare_t, spare_y,
                                   spare_k, max_steps - used)
            used += int(st[2] + st[3] - before)
            if code == PAUSED:
                if sampling and not full and st[7] >= ev_t.shape[1]:  # the crossings buffer is full
                    code = 0
                    mst[3] = 1.0
                    if not keep_going:
                        break
                continue  # otherwise the step budget of this call ran out: paused at the loop's top
            if code != 0:
                break
            if abs(st[0] - target) > 1e-12 * max(1.0, abs(target)):  # a terminal plane ended the run
                break
            st[0] = target
            if m > 0 and target == mst[5] + direction * interval or m > 0 and target == end:
                V = U[i, n:].reshape((n, m))
                if not orthonormalise(V, logs):
                    code = 2
                    break
                st[11] = 1.0  # the tangent vectors changed: f again at the start of the next step
                if sampling:
                    for j in range(m):
                        sums[i, j] += logs[j]
                    sums[i, m] += abs(st[0] - mst[5])
                mst[5] = st[0]
            if not sampling and target == t_keep:
                mst[2] = 1.0
                if m > 0 and mst[5] != st[0]:  # the transient ends inside an interval: start afresh there
                    V = U[i, n:].reshape((n, m))
                    if not orthonormalise(V, logs):
                        code = 2
                        break
                    st[11] = 1.0
                    mst[5] = st[0]
        codes[i] = code
        t_reached[i] = st[0]
        steps[i] = st[2]
        ev_count[i] = mst[4]
        for k in range(int(st[6]), grid.shape[0]):  # samples never reached
            for j in range(nz):
                samples[i, k, j] = math.nan
        i += 1
        mst[0] = i
        mst[1] = 0.0
    return 0
