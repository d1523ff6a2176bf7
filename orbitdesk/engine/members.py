"""Many independent members (initial states and/or parameter sets) advanced together: every stage of
the explicit Runge-Kutta method is one call of the model's batched kernel (``codegen.batch_source``)
for all members in flight, each member with its own time, step size and error control (the rules of
``explicit_rk.erk_advance``: accept/reject, step growth, the step clamped to its segment's end). A
member that blows up or meets an undefined value stops with its status and the others go on.

The members in flight are the columns of a block (states ``Z`` (nz, B), stages ``K`` (16, nz, B),
per-member scalars ``MS`` (rows below, B)); a member that ends hands its column to the next member
waiting (or, at the tail, the last column moves into it), so the kernel always sees columns
0 .. count - 1 filled. Samples on a common grid (strobe times, output times) come off each member's
dense output; plane crossings (sections) and turning points (local maxima) are located there too,
from ``t_keep`` on (a transient before it is run without them).

With ``m`` tangent vectors each member's column holds z = (u, V) (V n x m row by row, the kernel's
``which = m``): V is re-orthonormalised every ``interval`` (``tangent.orthonormalise``) and the
logarithms of the stretches after ``t_keep`` are summed per member, the Lyapunov exponents of a sweep.

The batched kernel ``g`` comes in as an argument, as the kernel does in ``explicit_rk.py``; the model's
own kernel ``f`` only passes through to ``member_outputs`` (compiled apart), which reads a member's
samples and crossings exactly as a single run does.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import (A_ALL, B_ALL, C_ALL, ERROR_EXPONENT, MAX_FACTOR, MIN_FACTOR, PAUSED, SAFETY,
                                          STAGES, error_norm, first_choice, first_trial, read_points, state_code)
from orbitdesk.engine import members_numpy
from orbitdesk.engine.jitting import inner, loop, noref, numpy_version
from orbitdesk.engine.status import C_STEP_FAILED
from orbitdesk.engine.tangent import orthonormalise
from orbitdesk.engine.member_rows import (MS_ROWS, R_ACC, R_CLAMP, R_CODE, R_END, R_FULL, R_GI, R_GIVE_UP, R_H,
                                          R_HTRY, R_ID, R_ISTART, R_LASTREJ, R_MIN, R_NEV, R_REJ, R_SAMP, R_STEP,
                                          R_T, R_TARGET, R_VERDICT, V_END, V_LOOK, V_PASSED)


@inner
def one_call(g, which, t, y, p, out, T1, Z1, P1, O1):
    """``out = model(which, t, y, p)`` for one member through the batched kernel (columns of one)."""
    T1[0] = t
    for j in range(y.shape[0]):
        Z1[j, 0] = y[j]
    for j in range(p.shape[0]):
        P1[j, 0] = p[j]
    g(which, T1, Z1, P1, O1, 1)
    for j in range(out.shape[0]):
        out[j] = O1[j, 0]


@noref
@numpy_version(members_numpy.combine_columns)
def _combine_columns(w, s, skip, Z, K, MS, out, count):
    """out = Z + step * sum_j w[j] K[j] for the members in columns 0 .. count - 1 (``skip``: zero
    weights left out, as ``explicit_rk._combine`` does), in the same order of operations as one member."""
    nz = Z.shape[0]
    for i in range(nz):
        for c in range(count):
            out[i, c] = 0.0
    for j in range(s):
        a = w[j]
        if a != 0.0 or not skip:
            for i in range(nz):
                for c in range(count):
                    out[i, c] += a * K[j, i, c]
    for i in range(nz):
        for c in range(count):
            out[i, c] = Z[i, c] + MS[R_STEP, c] * out[i, c]


@noref
def _step_code(Y1, Ks, c, bound):
    """Member c's step: 0 when its new state is finite within the bound and its rate there a number,
    1 for a blow-up, 2 for an undefined value."""
    code = state_code(Y1[:, c], bound)
    if code == 0 and state_code(Ks[:, c], math.inf) == 2:
        code = 2
    return code


@noref
def _swap(A, a, b):
    for r in range(A.shape[0]):
        v = A[r, a]
        A[r, a] = A[r, b]
        A[r, b] = v


@noref
def load_member(U, P, i, Z, Pb, c):
    """Member i's state (row i of U) and parameters (row i of P, or its only row) into column c."""
    for j in range(Z.shape[0]):
        Z[j, c] = U[i, j]
    shared = P.shape[0] == 1
    for j in range(Pb.shape[0]):
        Pb[j, c] = P[0, j] if shared else P[i, j]


@noref
def enter_member(U, P, i, Z, Pb, MS, c, t0, end, t_keep):
    """Member i into column c at t0 (``load_member``), its rows of MS afresh (sampling from the start
    when there is no transient before ``t_keep``)."""
    load_member(U, P, i, Z, Pb, c)
    for r in range(MS_ROWS):
        MS[r, c] = 0.0
    MS[R_T, c] = t0
    MS[R_END, c] = end
    MS[R_ID, c] = i
    MS[R_ISTART, c] = t0
    MS[R_SAMP, c] = 0.0 if (t_keep - t0) * (1.0 if end > t0 else -1.0) > 0.0 else 1.0


@noref
def _drop(c, count, Z, Y1, Pb, MS, K):
    """Column c freed: the last column of the block moves into it. Returns the new count."""
    last = count - 1
    if last != c:
        _swap(Z, c, last)
        _swap(Y1, c, last)
        _swap(Pb, c, last)
        _swap(MS, c, last)
        for s in range(K.shape[0]):
            _swap(K[s], c, last)
    return last


@loop
def _start(g, kind, m, adaptive, c, i, U, P, Z, Pb, K, MS, t0, t_end, t_keep, rtol, atol, max_step, T1, Z1, P1, O1,
           tmp, tmp2):
    """Put member i into column c: its state, parameters, f at the start and its first step.
    Returns a status code (2: f undefined at the start)."""
    nz = Z.shape[0]
    end = t_end[i]
    direction = 1.0 if end > t0 else -1.0
    enter_member(U, P, i, Z, Pb, MS, c, t0, end, t_keep)
    y = Z[:, c]
    p = Pb[:, c]
    K0 = K[0, :, c]
    one_call(g, m, t0, y, p, K0, T1, Z1, P1, O1)
    if state_code(K0, math.inf) == 2:
        return 2
    if adaptive and kind != 2:
        Kc = K[:, :, c]
        h0 = first_trial(y, Kc, direction, rtol, atol, max_step, tmp)
        one_call(g, m, t0 + h0 * direction, tmp, p, tmp2, T1, Z1, P1, O1)
        MS[R_H, c] = first_choice(kind, y, Kc, h0, tmp2, rtol, atol, max_step)
    else:
        MS[R_H, c] = max_step
    return 0


@noref
def _finish(c, code, U, Z, MS, codes, t_reached, steps, ev_count, samples, grid):
    i = int(MS[R_ID, c])
    codes[i] = code
    t_reached[i] = MS[R_T, c]
    steps[i] = MS[R_ACC, c]
    ev_count[i] = MS[R_NEV, c]
    nz = Z.shape[0]
    for j in range(nz):
        U[i, j] = Z[j, c]
    for k in range(int(MS[R_GI, c]), grid.shape[0]):  # samples never reached
        for j in range(nz):
            samples[i, k, j] = math.nan


@loop
def _renormalise(g, m, c, Z, Pb, K, MS, Vs, logs, T1, Z1, P1, O1):
    """Re-orthonormalise member c's tangent vectors (their stretches' logarithms into ``logs``), f again
    at its point. Returns False when a vector collapsed."""
    nz = Z.shape[0]
    n = nz // (m + 1)
    for a in range(n):
        for b in range(m):
            Vs[a, b] = Z[n + a * m + b, c]
    if not orthonormalise(Vs, logs):
        return False
    for a in range(n):
        for b in range(m):
            Z[n + a * m + b, c] = Vs[a, b]
    one_call(g, m, MS[R_T, c], Z[:, c], Pb[:, c], K[0, :, c], T1, Z1, P1, O1)
    return True


@loop
def members_advance(f, g, kind, adaptive, U, P, t0, t_end, rtol, atol, max_step, bound, grid, samples,
                    planes, plane_dir, terminal, ev_t, ev_y, ev_count, codes, t_reached, steps,
                    t_keep, m, interval, keep_going, sums, Z, Pb, K, Y1, ACC, TS, MS, BS, max_steps):
    """Run every row of U (N x n(m+1), in place: the state reached) from t0 to t_end[i] with the
    parameters P[i] (or P[0] for all when P has one row), up to B = Z.shape[1] members at a time.

    ``samples`` (N, G, n(m+1)): the states at ``grid``; ``ev_t`` (N, E), ``ev_y`` (N, E, n(m+1)): the
    first E crossings of ``planes`` after ``t_keep`` (a member stops once it has E of them, or with
    ``keep_going`` runs on to its end without looking for more); ``ev_count`` how many each has.
    ``codes``, ``t_reached``, ``steps``: per member status code, end time, accepted steps.
    ``sums`` (N, m + 1): the summed logarithms of the m stretches after ``t_keep`` and the time they
    cover (tangent vectors renormalised every ``interval``).

    The block's work arrays (Z, Pb (n_p, B), K (16, nz, B), Y1, ACC (nz, B), TS (B,), MS, BS (3,))
    carry everything between calls: returns 0 when every member is done, or PAUSED after about
    ``max_steps`` member-steps (the next call goes on; BS zero at the first call)."""
    N, nz = U.shape
    n = nz // (m + 1)
    B = Z.shape[1]
    s_n = STAGES[kind]
    A = A_ALL[kind]
    Bw = B_ALL[kind]
    C = C_ALL[kind]
    n_planes = planes.shape[0]
    E = ev_t.shape[1]
    T1 = np.empty(1)
    Z1 = np.empty((nz, 1))
    P1 = np.empty((Pb.shape[0], 1))
    O1 = np.empty((nz, 1))
    tmp = np.empty(nz)
    tmp2 = np.empty(nz)
    tmps = np.empty((3, nz))
    F = np.empty((7, nz))
    ev_k = np.empty(E, dtype=np.int64)
    yc = np.empty(nz)  # one member's column, copied out for member_outputs
    ync = np.empty(nz)
    Kc = np.empty((16, nz))
    K2 = np.empty((16, nz))
    pc = np.empty(Pb.shape[0])
    out_t = np.empty(grid.shape[0])
    Vs = np.empty((n, max(m, 1)))
    logs = np.empty(max(m, 1))
    count = int(BS[0])
    used = 0
    while True:
        # fill free columns with the members waiting
        while count < B and BS[1] < N:
            i = int(BS[1])
            BS[1] += 1
            code = _start(g, kind, m, adaptive, count, i, U, P, Z, Pb, K, MS, t0, t_end, t_keep, rtol, atol,
                          max_step, T1, Z1, P1, O1, tmp, tmp2)
            if code != 0:
                _finish(count, code, U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                BS[2] += 1
                continue
            count += 1
        BS[0] = count
        if count == 0:
            return 0
        if used >= max_steps:
            return PAUSED
        _plan_round(MS, count, t0, t_keep, m, interval, max_step)  # each member's step towards its segment's end
        # the stages, all members in one kernel call each
        for s in range(1, s_n):
            _combine_columns(A[s], s, np.bool_(True), Z, K, MS, ACC, count)
            _stage_times(TS, MS, C[s], count)
            g(m, TS, ACC, Pb, K[s], count)
        if kind == 2:  # classical RK4 in its textbook order of operations
            _rk4_columns(Z, K, MS, Y1, count)
        else:
            _combine_columns(Bw, s_n, np.bool_(False), Z, K, MS, Y1, count)
        _stage_times(TS, MS, np.float64(1.0), count)
        g(m, TS, Y1, Pb, K[s_n], count)
        used += count
        # accept or reject every member's step; the steps that need nothing more are taken there
        _judge_round(kind, adaptive, Z, Y1, K, MS, count, t0, rtol, atol, bound, grid, planes, plane_dir)
        # the members that need more, one by one: samples, crossings, renormalisation, their end
        c = np.int64(0)  # not a literal: callees get one compiled version
        while c < count:
            verdict = MS[R_VERDICT, c]
            if verdict == V_PASSED:
                c += 1
                continue
            MS[R_VERDICT, c] = V_PASSED
            h = MS[R_STEP, c]
            t = MS[R_T, c]
            t_new = t + h if MS[R_CLAMP, c] == 0.0 else MS[R_TARGET, c]
            end = MS[R_END, c]
            direction = 1.0 if end > t0 else -1.0
            i = int(MS[R_ID, c])
            code = int(MS[R_CODE, c])
            done = verdict == V_END
            moved = False
            if not done:
                MS[R_ACC, c] += 1.0
                sampling = MS[R_SAMP, c] != 0.0
                looking = sampling and MS[R_FULL, c] == 0.0 and n_planes > 0
                gi = int(MS[R_GI, c])
                stop = False
                if (gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0
                        or looking and _plane_met(planes, plane_dir, Z, Y1, K, s_n, c)):
                    stop = member_outputs(f, kind, m, adaptive, c, i, t, t_new, h, direction, Z, Y1, K, Pb, MS, rtol,
                                          atol, grid, samples, planes, plane_dir, terminal, ev_t, ev_y, looking,
                                          keep_going, yc, ync, Kc, K2, pc, F, tmps, out_t, ev_k)
                for j in range(nz):
                    Z[j, c] = Y1[j, c]
                    K[0, j, c] = K[s_n, j, c]
                MS[R_T, c] = t_new
                target = MS[R_TARGET, c]
                if stop:
                    done = True
                elif (target - t_new) * direction <= 1e-13 * max(1.0, abs(target)):  # the segment's end
                    MS[R_T, c] = target
                    if m > 0 and (target == MS[R_ISTART, c] + direction * interval or target == end):
                        if not _renormalise(g, m, c, Z, Pb, K, MS, Vs, logs, T1, Z1, P1, O1):
                            code = 2
                            done = True
                        else:
                            if MS[R_SAMP, c] != 0.0:
                                for j in range(m):
                                    sums[i, j] += logs[j]
                                sums[i, m] += abs(target - MS[R_ISTART, c])
                            MS[R_ISTART, c] = target
                    if not done and MS[R_SAMP, c] == 0.0 and target == t_keep:
                        MS[R_SAMP, c] = 1.0
                        if m > 0 and MS[R_ISTART, c] != target:  # the transient ends inside an interval: afresh
                            if not _renormalise(g, m, c, Z, Pb, K, MS, Vs, logs, T1, Z1, P1, O1):
                                code = 2
                                done = True
                            MS[R_ISTART, c] = target
                    if not done and target == end:
                        done = True
            if done:
                _finish(c, code, U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                BS[2] += 1
                if BS[1] < N:  # the next member waiting takes the column (it steps from the next round)
                    j = int(BS[1])
                    BS[1] += 1
                    code = _start(g, kind, m, adaptive, c, j, U, P, Z, Pb, K, MS, t0, t_end, t_keep, rtol, atol,
                                  max_step, T1, Z1, P1, O1, tmp, tmp2)
                    if code != 0:  # undefined at its start: ends at once, the column is free again
                        _finish(c, code, U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                        BS[2] += 1
                        moved = True
                    else:
                        c += 1
                        continue
                else:
                    moved = True
                if moved:  # the last column moves into this one (its step of this round not yet looked at)
                    count = _drop(c, count, Z, Y1, Pb, MS, K)
                    BS[0] = count
                    continue
            c += 1
        BS[0] = count


@noref
@numpy_version(members_numpy.plan_round)
def _plan_round(MS, count, t0, t_keep, m, interval, max_step):
    """Each member's next step (rows R_TARGET, R_MIN, R_CLAMP, R_HTRY, R_STEP): towards its segment's end
    (the end of the transient, of the renormalisation interval, of its run), clamped onto it."""
    for c in range(count):
        t = MS[R_T, c]
        end = MS[R_END, c]
        direction = 1.0 if end > t0 else -1.0
        target = end
        if MS[R_SAMP, c] == 0.0 and (target - t_keep) * direction > 0.0:
            target = t_keep
        boundary = MS[R_ISTART, c] + direction * interval
        if m > 0 and (target - boundary) * direction > 1e-9 * interval:
            target = boundary
        MS[R_TARGET, c] = target
        min_step = 10.0 * abs(np.nextafter(t, direction * math.inf) - t)
        MS[R_MIN, c] = min_step
        h_try = min(MS[R_H, c], max_step)
        if h_try < min_step:
            h_try = min_step
        t_new = t + direction * h_try
        MS[R_CLAMP, c] = 0.0
        if (t_new - target) * direction > 0.0 or (target - t_new) * direction <= 1e-13 * max(1.0, abs(target)):
            t_new = target
            MS[R_CLAMP, c] = 1.0
        MS[R_HTRY, c] = h_try
        MS[R_STEP, c] = t_new - t


@noref
@numpy_version(members_numpy.stage_times)
def _stage_times(TS, MS, cs, count):
    """The members' times at the stage at fraction ``cs`` of their steps."""
    for c in range(count):
        TS[c] = MS[R_T, c] + cs * MS[R_STEP, c]


@noref
@numpy_version(members_numpy.rk4_columns)
def _rk4_columns(Z, K, MS, Y1, count):
    """Classical RK4's step ends of the members, in the textbook order of operations."""
    for i in range(Z.shape[0]):
        for c in range(count):
            Y1[i, c] = Z[i, c] + MS[R_STEP, c] / 6.0 * (K[0, i, c] + 2.0 * K[1, i, c] + 2.0 * K[2, i, c] + K[3, i, c])


@noref
@numpy_version(members_numpy.judge_round)
def _judge_round(kind, adaptive, Z, Y1, K, MS, count, t0, rtol, atol, bound, grid, planes, plane_dir):
    """Every member's step accepted or rejected by its error (``erk_advance``'s rules), its next step size,
    and its verdict (row R_VERDICT): V_PASSED when nothing more is to be done this round (a rejected step;
    an accepted one that holds no sample, may cross no plane and ends no segment: taken here), V_LOOK for
    an accepted step to be looked at one by one, V_END for a member that ends with the code in R_CODE
    (a failure, or given up by the driver)."""
    s_n = STAGES[kind]
    exponent = ERROR_EXPONENT[kind]
    nz = Z.shape[0]
    for c in range(count):
        MS[R_VERDICT, c] = V_PASSED
        MS[R_CODE, c] = 0.0
        h = MS[R_STEP, c]
        if MS[R_GIVE_UP, c] != 0.0:  # the driver gave up on this member at the pause: this step is not taken
            MS[R_VERDICT, c] = V_END
            MS[R_CODE, c] = C_STEP_FAILED
            continue
        if adaptive:
            err = error_norm(kind, h, Z[:, c], Y1[:, c], K[:, :, c], rtol, atol)
            if not (err <= 1.0):  # rejected, or NaN
                MS[R_REJ, c] += 1.0
                factor = MIN_FACTOR if err != err else max(MIN_FACTOR, SAFETY * err ** exponent)
                MS[R_H, c] = abs(h) * factor
                MS[R_LASTREJ, c] = 1.0
                if MS[R_H, c] < MS[R_MIN, c]:
                    MS[R_VERDICT, c] = V_END
                    MS[R_CODE, c] = 2.0 if state_code(Y1[:, c], bound) == 2 else 3.0
                continue
            factor = MAX_FACTOR if err == 0.0 else min(MAX_FACTOR, SAFETY * err ** exponent)
            if MS[R_LASTREJ, c] != 0.0:
                factor = min(1.0, factor)
            MS[R_LASTREJ, c] = 0.0
            h_next = abs(h) * factor
            if MS[R_CLAMP, c] != 0.0:  # a step shortened to land on its end says nothing against a longer one
                h_next = max(h_next, MS[R_HTRY, c])
            MS[R_H, c] = h_next
        code = _step_code(Y1, K[s_n], c, bound)
        if code != 0:
            MS[R_VERDICT, c] = V_END
            MS[R_CODE, c] = code
            continue
        t_new = MS[R_T, c] + h if MS[R_CLAMP, c] == 0.0 else MS[R_TARGET, c]
        direction = 1.0 if MS[R_END, c] > t0 else -1.0
        gi = int(MS[R_GI, c])
        target = MS[R_TARGET, c]
        if (gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0
                or (target - t_new) * direction <= 1e-13 * max(1.0, abs(target))
                or MS[R_SAMP, c] != 0.0 and MS[R_FULL, c] == 0.0 and planes.shape[0] > 0
                and _plane_met(planes, plane_dir, Z, Y1, K, s_n, c)):
            MS[R_VERDICT, c] = V_LOOK
            continue
        MS[R_ACC, c] += 1.0
        for j in range(nz):
            Z[j, c] = Y1[j, c]
            K[0, j, c] = K[s_n, j, c]
        MS[R_T, c] = t_new


@noref
def member_outputs(f, kind, m, adaptive, c, i, t, t_new, h, direction, Z, Y1, K, Pb, MS, rtol, atol, grid, samples,
                   planes, plane_dir, terminal, ev_t, ev_y, looking, keep_going, yc, ync, Kc, K2, pc, F, tmps, out_t,
                   ev_k):
    """Member c's samples on the grid inside its step and (``looking``) its crossings of the planes, read
    as a single run reads them (``explicit_rk.read_points``, with the model's own kernel ``f``: the
    dense output where it meets the tolerance, else sub-steps), from the member's column copied out.
    Returns whether it stops (a terminal plane, or the crossings buffer full without ``keep_going``).
    Compiled apart from the block loop: a step rarely needs it."""
    nz = Z.shape[0]
    s_n = STAGES[kind]
    for j in range(nz):
        yc[j] = Z[j, c]
        ync[j] = Y1[j, c]
        for s in range(s_n + 1):
            Kc[s, j] = K[s, j, c]
    for j in range(Pb.shape[0]):
        pc[j] = Pb[j, c]
    E = ev_t.shape[1]
    n_planes = planes.shape[0] if looking else 0
    gi, n_ev, stop = read_points(f, kind, m, adaptive, t, t_new, h, direction, yc, ync, pc, Kc, F, K2, rtol, atol,
                                 tmps, grid, int(MS[R_GI, c]), out_t, samples[i], planes[:n_planes],
                                 plane_dir[:n_planes], terminal[:n_planes], MS[R_ACC, c] == 1.0, ev_t[i], ev_y[i],
                                 ev_k, int(MS[R_NEV, c]))
    MS[R_GI, c] = gi
    if looking:
        MS[R_NEV, c] = n_ev
        if n_ev >= E:  # the crossings buffer is full
            MS[R_FULL, c] = 1.0
            if not keep_going:
                stop = True
    return stop


@noref
def _plane_met(planes, plane_dir, Z, Y1, K, s_n, c):
    """Whether member c's step may cross a plane or turn (its value or rate changes sign): then
    ``member_outputs`` looks closely."""
    nz = Z.shape[0]
    for k in range(planes.shape[0]):
        ga = -planes[k, nz]
        gb = -planes[k, nz]
        ra = 0.0
        rb = 0.0
        for j in range(nz):
            w = planes[k, j]
            if w != 0.0:
                ga += w * Z[j, c]
                gb += w * Y1[j, c]
                ra += w * K[0, j, c]
                rb += w * K[s_n, j, c]
        if (ra > 0.0) != (rb > 0.0) or (ga <= 0.0) != (gb <= 0.0) or ga == 0.0 or gb == 0.0:
            return True
    return False
