"""The plain-Python versions of the member loop's passes over the block (``members.py``): the same
arithmetic in the same order of operations on whole rows of members with numpy, in place of the
element-by-element loops that numba compiles to a few instructions and plain Python runs a bytecode at a
time (``jitting.numpy_version``). With them the plain engine steps adaptive members as it steps the
fixed-step ones: one batched kernel call per stage, every member's step control on arrays, and only the
members whose step holds a sample, a possible crossing or a segment's end looked at one by one."""

import numpy as np

from orbitdesk.engine.explicit_rk import (E3, E_ALL, ERROR_EXPONENT, MAX_FACTOR, MIN_FACTOR, SAFETY, STAGES)
from orbitdesk.engine.member_rows import (R_ACC, R_CLAMP, R_CODE, R_END, R_FULL, R_GI, R_GIVE_UP, R_H, R_HTRY,
                                          R_ISTART, R_LASTREJ, R_MIN, R_REJ, R_SAMP, R_STEP, R_T, R_TARGET,
                                          R_VERDICT, V_END, V_LOOK, V_PASSED)
from orbitdesk.engine.status import C_STEP_FAILED


def combine_columns(w, s, skip, Z, K, MS, out, count):
    acc = np.zeros((Z.shape[0], count))
    for j in range(s):
        a = w[j]
        if a != 0.0 or not skip:
            acc += a * K[j, :, :count]
    out[:, :count] = Z[:, :count] + MS[R_STEP, :count] * acc


def stage_times(TS, MS, cs, count):
    TS[:count] = MS[R_T, :count] + cs * MS[R_STEP, :count]


def rk4_columns(Z, K, MS, Y1, count):
    Y1[:, :count] = Z[:, :count] + MS[R_STEP, :count] / 6.0 * (K[0, :, :count] + 2.0 * K[1, :, :count]
                                                               + 2.0 * K[2, :, :count] + K[3, :, :count])


def plan_round(MS, count, t0, t_keep, m, interval, max_step):
    t = MS[R_T, :count]
    direction = np.where(MS[R_END, :count] > t0, 1.0, -1.0)
    target = MS[R_END, :count].copy()
    early = (MS[R_SAMP, :count] == 0.0) & ((target - t_keep) * direction > 0.0)
    target[early] = t_keep
    if m > 0:
        boundary = MS[R_ISTART, :count] + direction * interval
        cut = (target - boundary) * direction > 1e-9 * interval
        target[cut] = boundary[cut]
    MS[R_TARGET, :count] = target
    min_step = 10.0 * np.abs(np.nextafter(t, direction * np.inf) - t)
    MS[R_MIN, :count] = min_step
    h_try = np.minimum(MS[R_H, :count], max_step)
    h_try = np.where(h_try < min_step, min_step, h_try)
    t_new = t + direction * h_try
    clamp = ((t_new - target) * direction > 0.0) | (
        (target - t_new) * direction <= 1e-13 * np.maximum(1.0, np.abs(target)))
    MS[R_CLAMP, :count] = clamp
    MS[R_HTRY, :count] = h_try
    MS[R_STEP, :count] = np.where(clamp, target, t_new) - t


def state_codes(Y, bound):
    """``explicit_rk.state_code`` of each column."""
    undefined = np.isnan(Y).any(axis=0)
    beyond = (~(np.abs(Y) <= bound)).any(axis=0)
    return np.where(undefined, 2, np.where(beyond, 1, 0))


def error_norms(kind, h, Zc, Yc, Kc, rtol, atol):
    """``explicit_rk.error_norm`` of each member (columns), the sums in the same order."""
    n, count = Zc.shape
    E = E_ALL[kind]
    e5 = np.zeros(count)
    e3 = np.zeros(count)
    for i in range(n):
        scale = atol + rtol * np.fmax(np.abs(Zc[i]), np.abs(Yc[i]))  # fmax: as Python's max when y_new is NaN
        a = np.zeros(count)
        b = np.zeros(count)
        for j in range(STAGES[kind] + 1):
            a += E[j] * Kc[j, i]
            b += E3[j] * Kc[j, i]
        a /= scale
        b /= scale
        e5 += a * a
        e3 += b * b
    if kind == 0:
        err = np.abs(h) * e5 / np.sqrt((e5 + 0.01 * e3) * n)
        return np.where((e5 == 0.0) & (e3 == 0.0), 0.0, err)
    return np.abs(h) * np.sqrt(e5 / n)


def planes_met(planes, plane_dir, Z, Y1, K, s_n, members):
    """``members._plane_met`` of the given members (an index array): a plane their step may cross or turn on."""
    nz = Z.shape[0]
    met = np.zeros(members.size, dtype=bool)
    for k in range(planes.shape[0]):
        ga = np.full(members.size, -planes[k, nz])
        gb = ga.copy()
        ra = np.zeros(members.size)
        rb = np.zeros(members.size)
        for j in np.flatnonzero(planes[k, :nz]):
            w = planes[k, j]
            ga += w * Z[j, members]
            gb += w * Y1[j, members]
            ra += w * K[0, j, members]
            rb += w * K[s_n, j, members]
        met |= ((ra > 0.0) != (rb > 0.0)) | ((ga <= 0.0) != (gb <= 0.0)) | (ga == 0.0) | (gb == 0.0)
    return met


def judge_round(kind, adaptive, Z, Y1, K, MS, count, t0, rtol, atol, bound, grid, planes, plane_dir):
    s_n = STAGES[kind]
    h = MS[R_STEP, :count]
    verdict = np.full(count, V_PASSED)
    code = np.zeros(count)
    give_up = MS[R_GIVE_UP, :count] != 0.0
    verdict[give_up] = V_END
    code[give_up] = C_STEP_FAILED
    accepted = ~give_up
    if adaptive:
        err = error_norms(kind, h, Z[:, :count], Y1[:, :count], K[:, :, :count], rtol, atol)
        exponent = float(ERROR_EXPONENT[kind])
        # Python's power (the C library's, as the compiled loop's): numpy's differs in the last bit for 1 in 20
        grow = SAFETY * np.array([e ** exponent if e > 0.0 else (np.inf if e == 0.0 else np.nan) for e in err.tolist()])
        rejected = accepted & ~(err <= 1.0)
        accepted &= ~rejected
        r = np.flatnonzero(rejected)
        MS[R_REJ, r] += 1.0
        MS[R_H, r] = np.abs(h[r]) * np.where(np.isnan(err[r]), MIN_FACTOR, np.maximum(MIN_FACTOR, grow[r]))
        MS[R_LASTREJ, r] = 1.0
        failed = r[MS[R_H, r] < MS[R_MIN, r]]
        verdict[failed] = V_END
        code[failed] = np.where(state_codes(Y1[:, failed], bound) == 2, 2.0, 3.0)
        a = np.flatnonzero(accepted)
        factor = np.where(err[a] == 0.0, MAX_FACTOR, np.minimum(MAX_FACTOR, grow[a]))
        factor = np.where(MS[R_LASTREJ, a] != 0.0, np.minimum(1.0, factor), factor)
        MS[R_LASTREJ, a] = 0.0
        h_next = np.abs(h[a]) * factor
        MS[R_H, a] = np.where(MS[R_CLAMP, a] != 0.0, np.maximum(h_next, MS[R_HTRY, a]), h_next)
    a = np.flatnonzero(accepted)
    codes = state_codes(Y1[:, a], bound)
    codes = np.where((codes == 0) & np.isnan(K[s_n][:, a]).any(axis=0), 2, codes)
    bad = a[codes != 0]
    verdict[bad] = V_END
    code[bad] = codes[codes != 0]
    a = a[codes == 0]
    t_new = np.where(MS[R_CLAMP, a] == 0.0, MS[R_T, a] + h[a], MS[R_TARGET, a])
    direction = np.where(MS[R_END, a] > t0, 1.0, -1.0)
    target = MS[R_TARGET, a]
    gi = MS[R_GI, a].astype(np.int64)
    look = (target - t_new) * direction <= 1e-13 * np.maximum(1.0, np.abs(target))
    if grid.shape[0]:
        look |= (gi < grid.shape[0]) & ((grid[np.minimum(gi, grid.shape[0] - 1)] - t_new) * direction <= 0.0)
    if planes.shape[0]:
        watching = (MS[R_SAMP, a] != 0.0) & (MS[R_FULL, a] == 0.0)
        look[watching] |= planes_met(planes, plane_dir, Z, Y1, K, s_n, a[watching])
    verdict[a[look]] = V_LOOK
    taken = a[~look]
    MS[R_ACC, taken] += 1.0
    Z[:, taken] = Y1[:, taken]
    K[0][:, taken] = K[s_n][:, taken]
    MS[R_T, taken] = t_new[~look]
    MS[R_VERDICT, :count] = verdict
    MS[R_CODE, :count] = code
