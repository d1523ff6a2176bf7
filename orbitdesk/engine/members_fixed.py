"""Members at one fixed step of classical RK4 that all end at the same time: the lean path of
``members.py``.

The members in flight start together (a cohort: the next one starts when the block is empty), so they
share their time, step and segment (transient, renormalisation interval, end): the step is worked out
once, every stage is one whole-block update followed by one call of the batched kernel, and the bound
and finite check is one pass over the block per step. Members are looked at one by one only where a
step needs it: a time of the common grid inside it, a plane it may cross, a renormalisation, a member
the block check found bad, and the end. A member that stops early (a blow-up, an undefined value, a
terminal plane) gives up its column to the last one; the cohort goes on with fewer.

The arithmetic is that of ``members_advance`` for RK4 in the same order of operations, so both paths
give the same numbers; the per-member rows ``MS`` are brought up to date before anything reads them
(a member's outputs, its end, a pause).
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, STAGES, state_code
from orbitdesk.engine.jitting import loop, noref, numpy_version
from orbitdesk.engine.members import (R_ACC, R_FULL, R_GI, R_GIVE_UP, R_ID, R_ISTART, R_SAMP, R_T, _drop, _finish,
                                      _plane_met, _renormalise, enter_member, member_outputs)
from orbitdesk.engine.status import C_STEP_FAILED

def _stage_block_numpy(Z, Kj, a, step, out, count):
    out[:, :count] = Z[:, :count] + step * (a * Kj[:, :count])


@noref
@numpy_version(_stage_block_numpy)
def _stage_block(Z, Kj, a, step, out, count):
    """out = Z + step * (a K_j) for the block (``members._combine_columns`` for one weight)."""
    for i in range(Z.shape[0]):
        for c in range(count):
            out[i, c] = Z[i, c] + step * (a * Kj[i, c])


def _rk4_block_numpy(Z, K, step, out, count):
    w = step / 6.0
    out[:, :count] = Z[:, :count] + w * (K[0, :, :count] + 2.0 * K[1, :, :count] + 2.0 * K[2, :, :count]
                                         + K[3, :, :count])


@noref
@numpy_version(_rk4_block_numpy)
def _rk4_block(Z, K, step, out, count):
    """The RK4 step's end for the block, in the textbook order of operations (as ``members_advance``)."""
    w = step / 6.0
    for i in range(Z.shape[0]):
        for c in range(count):
            out[i, c] = Z[i, c] + w * (K[0, i, c] + 2.0 * K[1, i, c] + 2.0 * K[2, i, c] + K[3, i, c])


def _fill_numpy(v, value, count):
    v[:count] = value


@noref
@numpy_version(_fill_numpy)
def _fill(v, value, count):
    for c in range(count):
        v[c] = value


def _bad_block_numpy(Y1, Ks, bound, count):
    rates = Ks[:, :count]
    return int(np.count_nonzero(~(np.abs(Y1[:, :count]) <= bound)) + np.count_nonzero(rates != rates))


@noref
@numpy_version(_bad_block_numpy)
def _bad_block(Y1, Ks, bound, count):
    """How many entries of the block's new states are NaN or past the bound, or rates NaN there."""
    bad = 0
    for i in range(Y1.shape[0]):
        for c in range(count):
            v = Y1[i, c]
            r = Ks[i, c]
            bad += (not (abs(v) <= bound)) + (r != r)
    return bad


def _take_block_numpy(Z, Y1, K0, Ks, count):
    Z[:, :count] = Y1[:, :count]
    K0[:, :count] = Ks[:, :count]


@noref
@numpy_version(_take_block_numpy)
def _take_block(Z, Y1, K0, Ks, count):
    """The new states and their rates become the block's current ones."""
    for i in range(Z.shape[0]):
        for c in range(count):
            Z[i, c] = Y1[i, c]
            K0[i, c] = Ks[i, c]


def _near_block_numpy(planes, plane_dir, Z, Y1, K, s_n, count, near):
    nz = Z.shape[0]
    K0, Ks = K[0], K[s_n]
    hit = np.zeros(count, dtype=bool)
    for k in range(planes.shape[0]):
        ga = np.full(count, -planes[k, nz])
        gb = ga.copy()
        ra = np.zeros(count)
        rb = np.zeros(count)
        for j in range(nz):
            w = planes[k, j]
            if w != 0.0:
                ga += w * Z[j, :count]
                gb += w * Y1[j, :count]
                ra += w * K0[j, :count]
                rb += w * Ks[j, :count]
        hit |= ((ra > 0.0) != (rb > 0.0)) | ((ga <= 0.0) != (gb <= 0.0)) | (ga == 0.0) | (gb == 0.0)
    near[:count] = hit
    return int(np.count_nonzero(hit))


@noref
@numpy_version(_near_block_numpy)
def _near_block(planes, plane_dir, Z, Y1, K, s_n, count, near):
    """near[c] = 1 where member c's step may cross a plane or turn (``members._plane_met``); returns how
    many."""
    total = 0
    for c in range(count):
        hit = _plane_met(planes, plane_dir, Z, Y1, K, s_n, c)
        near[c] = 1.0 if hit else 0.0
        total += hit
    return total


def _share_numpy(MS, count, t, acc, gi, samp, istart):
    MS[R_T, :count] = t
    MS[R_ACC, :count] = acc
    MS[R_GI, :count] = gi
    MS[R_SAMP, :count] = samp
    MS[R_ISTART, :count] = istart


@noref
@numpy_version(_share_numpy)
def _share(MS, count, t, acc, gi, samp, istart):
    """The cohort's common values into every member's rows (what ``_finish``, ``member_outputs``, the
    renormalisation and the driver's pauses read)."""
    for c in range(count):
        MS[R_T, c] = t
        MS[R_ACC, c] = acc
        MS[R_GI, c] = gi
        MS[R_SAMP, c] = samp
        MS[R_ISTART, c] = istart


@loop
def _cohort(g, m, U, P, Z, Pb, K, Y1, MS, BS, TS, t0, end, t_keep, codes, t_reached, steps, ev_count, samples,
            grid):
    """The next members waiting (up to the block's width) start together at t0: their states, parameters
    and rates (one kernel call for all). A member whose rate is undefined at its start ends at once.
    Returns how many are in flight."""
    N, nz = U.shape
    B = Z.shape[1]
    count = np.int64(0)  # not a literal: enter_member gets one compiled version
    while count < B and BS[1] < N:
        i = int(BS[1])
        BS[1] += 1
        enter_member(U, P, i, Z, Pb, MS, count, t0, end, t_keep)
        count += 1
    if count == 0:
        return 0
    _fill(TS, t0, count)
    g(m, TS, Z, Pb, K[0], count)
    c = np.int64(0)  # not a literal: callees get one compiled version
    while c < count:
        if state_code(K[0, :, c], math.inf) == 2:
            _finish(c, np.int64(2), U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
            BS[2] += 1
            count = _drop(c, count, Z, Y1, Pb, MS, K)
            continue
        c += 1
    return count


@loop
def _renormalise_cohort(g, m, count, U, Z, Pb, K, Y1, MS, BS, Vs, logs, T1, Z1, P1, O1, sums, summing, span, codes,
                        t_reached, steps, ev_count, samples, grid):
    """Every member's tangent vectors re-orthonormalised (``members._renormalise``), with ``summing`` the
    logarithms of their stretches and ``span`` added to ``sums``; a member whose vectors collapsed ends
    (undefined). Returns how many are left in flight."""
    c = np.int64(0)  # not a literal: callees get one compiled version
    while c < count:
        if not _renormalise(g, m, c, Z, Pb, K, MS, Vs, logs, T1, Z1, P1, O1):
            _finish(c, np.int64(2), U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
            BS[2] += 1
            count = _drop(c, count, Z, Y1, Pb, MS, K)
            continue
        if summing:
            i = int(MS[R_ID, c])
            for j in range(m):
                sums[i, j] += logs[j]
            sums[i, m] += span
        c += 1
    return count


@loop
def members_fixed(f, g, kind, adaptive, U, P, t0, t_end, rtol, atol, h, bound, grid, samples, planes, plane_dir,
                  terminal, ev_t, ev_y, ev_count, codes, t_reached, steps, t_keep, m, interval, keep_going, sums, Z,
                  Pb, K, Y1, ACC, TS, MS, BS, max_steps):
    """``members.members_advance`` (the same arguments and work arrays; ``kind`` RK4, not ``adaptive``,
    ``t_end`` the same for every member) at the step ``h``, the members of a cohort sharing their time.
    Callees get run-time values (``np.int64(...)`` for a constant code), never literals: numba would
    compile a second version of each for them. Returns 0 when every
    member is done, or PAUSED after about ``max_steps`` member-steps (the next call goes on)."""
    N, nz = U.shape
    if N == 0:
        return 0
    n = nz // (m + 1)
    s_n = STAGES[kind]
    n_planes = planes.shape[0]
    G = grid.shape[0]
    E = ev_t.shape[1]
    end = t_end[0]
    direction = 1.0 if end > t0 else -1.0
    T1 = np.empty(1)
    Z1 = np.empty((nz, 1))
    P1 = np.empty((Pb.shape[0], 1))
    O1 = np.empty((nz, 1))
    tmps = np.empty((3, nz))
    F = np.empty((7, nz))
    ev_k = np.empty(E, dtype=np.int64)
    yc = np.empty(nz)
    ync = np.empty(nz)
    Kc = np.empty((16, nz))
    K2 = np.empty((16, nz))
    pc = np.empty(Pb.shape[0])
    out_t = np.empty(G)
    Vs = np.empty((n, max(m, 1)))
    logs = np.empty(max(m, 1))
    near = np.empty(Z.shape[1])
    count = int(BS[0])
    t, acc, gi, samp, istart = t0, 0.0, 0, 0.0, t0
    if count > 0:  # going on after a pause: the cohort's values, members the driver gave up on
        t, acc, gi, samp, istart = MS[R_T, 0], MS[R_ACC, 0], int(MS[R_GI, 0]), MS[R_SAMP, 0], MS[R_ISTART, 0]
        c = np.int64(0)  # not a literal: callees get one compiled version
        while c < count:
            if MS[R_GIVE_UP, c] != 0.0:
                _finish(c, np.int64(C_STEP_FAILED), U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                BS[2] += 1
                count = _drop(c, count, Z, Y1, Pb, MS, K)
                continue
            c += 1
    used = 0
    while True:
        if count == 0:
            if BS[1] >= N:
                BS[0] = 0
                return 0
            count = _cohort(g, m, U, P, Z, Pb, K, Y1, MS, BS, TS, t0, end, t_keep, codes, t_reached, steps, ev_count,
                            samples, grid)
            t, acc, gi, istart = t0, 0.0, 0, t0
            samp = 0.0 if (t_keep - t0) * direction > 0.0 else 1.0
            continue
        if used >= max_steps:
            _share(MS, count, t, acc, gi, samp, istart)
            BS[0] = count
            return PAUSED
        used += count
        # the cohort's step towards its segment's end
        target = end
        if samp == 0.0 and (target - t_keep) * direction > 0.0:
            target = t_keep
        boundary = istart + direction * interval
        if m > 0 and (target - boundary) * direction > 1e-9 * interval:
            target = boundary
        h_try = h
        min_step = 10.0 * abs(np.nextafter(t, direction * math.inf) - t)
        if h_try < min_step:
            h_try = min_step
        t_new = t + direction * h_try
        clamped = (t_new - target) * direction > 0.0 or (target - t_new) * direction <= 1e-13 * max(1.0, abs(target))
        if clamped:
            t_new = target
        step = t_new - t
        if not clamped:
            t_new = t + step  # the time the member loop reaches (members_advance's order of operations)
        # the stages: whole-block updates, one kernel call each
        _stage_block(Z, K[0], 0.5, step, ACC, count)
        _fill(TS, t + 0.5 * step, count)
        g(m, TS, ACC, Pb, K[1], count)
        _stage_block(Z, K[1], 0.5, step, ACC, count)
        g(m, TS, ACC, Pb, K[2], count)
        _stage_block(Z, K[2], 1.0, step, ACC, count)
        _fill(TS, t + 1.0 * step, count)
        g(m, TS, ACC, Pb, K[3], count)
        _rk4_block(Z, K, step, Y1, count)
        _fill(TS, t + step, count)
        g(m, TS, Y1, Pb, K[s_n], count)
        if _bad_block(Y1, K[s_n], bound, count) > 0:  # members stop at their last good state
            _share(MS, count, t, acc, gi, samp, istart)
            c = np.int64(0)  # not a literal: callees get one compiled version
            while c < count:
                code = state_code(Y1[:, c], bound)
                if code == 0 and state_code(K[s_n, :, c], math.inf) == 2:
                    code = 2
                if code != 0:
                    _finish(c, code, U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                    BS[2] += 1
                    count = _drop(c, count, Z, Y1, Pb, MS, K)
                    continue
                c += 1
            if count == 0:
                continue
        acc += 1.0
        reading = gi < G and (grid[gi] - t_new) * direction <= 0.0
        near_any = samp != 0.0 and n_planes > 0 and _near_block(planes, plane_dir, Z, Y1, K, s_n, count, near) > 0
        if reading or near_any:  # samples and crossings, member by member
            _share(MS, count, t, acc, gi, samp, istart)
            gi_new = gi
            c = np.int64(0)  # not a literal: callees get one compiled version
            while c < count:
                i = int(MS[R_ID, c])
                seeking = samp != 0.0 and n_planes > 0 and MS[R_FULL, c] == 0.0
                if reading or seeking and near[c] != 0.0:
                    stop = member_outputs(f, kind, m, adaptive, c, i, t, t_new, step, direction, Z, Y1, K, Pb, MS,
                                          rtol, atol, grid, samples, planes, plane_dir, terminal, ev_t, ev_y, seeking,
                                          keep_going, yc, ync, Kc, K2, pc, F, tmps, out_t, ev_k)
                    gi_new = int(MS[R_GI, c])
                    if stop:  # a terminal plane, or all its crossings: it ends here
                        for j in range(nz):
                            Z[j, c] = Y1[j, c]
                        MS[R_T, c] = t_new
                        _finish(c, np.int64(0), U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
                        BS[2] += 1
                        count = _drop(c, count, Z, Y1, Pb, MS, K)
                        near[c] = near[count]
                        continue
                c += 1
            gi = gi_new
        _take_block(Z, Y1, K[0], K[s_n], count)
        t = t_new
        if (target - t_new) * direction > 1e-13 * max(1.0, abs(target)):
            continue
        # the segment's end: renormalisation, the transient's end, the end
        t = target
        if m > 0 and (target == istart + direction * interval or target == end):
            _share(MS, count, t, acc, gi, samp, istart)
            count = _renormalise_cohort(g, m, count, U, Z, Pb, K, Y1, MS, BS, Vs, logs, T1, Z1, P1, O1, sums,
                                        samp != 0.0, abs(target - istart), codes, t_reached, steps, ev_count,
                                        samples, grid)
            istart = target
        if samp == 0.0 and target == t_keep:
            samp = 1.0
            if m > 0 and istart != target:  # the transient ends inside an interval: afresh
                _share(MS, count, t, acc, gi, samp, istart)
                count = _renormalise_cohort(g, m, count, U, Z, Pb, K, Y1, MS, BS, Vs, logs, T1, Z1, P1, O1, sums,
                                            np.bool_(False), 0.0, codes, t_reached, steps, ev_count, samples,
                                            grid)
                istart = target
        if target == end:
            _share(MS, count, t, acc, gi, samp, istart)
            for c in range(count):
                _finish(c, np.int64(0), U, Z, MS, codes, t_reached, steps, ev_count, samples, grid)
            BS[2] += count
            count = 0
