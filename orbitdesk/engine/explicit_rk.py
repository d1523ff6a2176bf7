"""Explicit Runge-Kutta methods: Dormand-Prince 8(5,3) with its 7th-order dense output,
Dormand-Prince 5(4) with its quartic dense output, and classical RK4 (fixed step, cubic Hermite
dense output) — one loop for all three.

Tableaux: Dormand & Prince (1980) and Prince & Dormand (1981) as printed in Hairer, Norsett &
Wanner, Solving ODEs I (2nd ed.), sec. II.5 and II.6: Dormand-Prince 5(4) written out below (with
Shampine's dense output for the optimal c_6, as scipy's ``RK45``), DOP853's read from scipy's
``dop853_coefficients`` file alone (``_dop853_table``), so a run on these loops never imports
``scipy.integrate`` (about 0.6 s of a cold start). Error control as there: a step is accepted when the scaled error norm is
at most 1 (scale ``atol + rtol * max(|y|, |y_new|)``), the next step is ``h * min(10, max(0.2,
0.9 * err^(-1/(q+1))))`` and never grows right after a rejection. DOP853 estimates its error with
the 5th- and 3rd-order combination of the Fortran code.

The model's kernel ``f(which, t, z, p, out)`` (``codegen.py``: the right-hand side, with ``which``
tangent vectors the variational equations too) comes in as an argument; the loops are compiled
once (``jitting.loop``) for every model.

Samples and crossings read between step ends are held to the tolerance like the ends: a step that is
read has its dense output checked by its defect (``interpolant_fits``); where it misses, the points
inside that step come from sub-steps of the method from the step's start (``point_value``).
"""

import importlib.util
import math
import sys

import numpy as np

from orbitdesk.engine.jitting import at, inner, loop, noref


def _dop853_table():
    """scipy's table of DOP853 coefficients (a file that imports only numpy), loaded without importing
    the ``scipy.integrate`` package around it; the package's import when its layout differs."""
    name = "scipy.integrate._ivp.dop853_coefficients"
    if name in sys.modules:
        return sys.modules[name]
    scipy_spec = importlib.util.find_spec("scipy")
    for folder in scipy_spec.submodule_search_locations or ():
        path = f"{folder}/integrate/_ivp/dop853_coefficients.py"
        spec = importlib.util.spec_from_file_location("_orbitdesk_dop853_coefficients", path)
        try:
            table = importlib.util.module_from_spec(spec)
            spec.loader.exec_module(table)
        except (OSError, ImportError):
            continue
        return table
    return importlib.import_module(name)


_D853 = _dop853_table()
# Dormand-Prince 5(4) (Dormand & Prince 1980), its error weights and dense output (Shampine 1986)
_DP5_A = np.array([[0, 0, 0, 0, 0],
                   [1 / 5, 0, 0, 0, 0],
                   [3 / 40, 9 / 40, 0, 0, 0],
                   [44 / 45, -56 / 15, 32 / 9, 0, 0],
                   [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0],
                   [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656]])
_DP5_B = np.array([35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84])
_DP5_C = np.array([0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1])
_DP5_E = np.array([-71 / 57600, 0, 71 / 16695, -71 / 1920, 17253 / 339200, -22 / 525, 1 / 40])
_DP5_P = np.array([
    [1, -8048581381 / 2820520608, 8663915743 / 2820520608, -12715105075 / 11282082432],
    [0, 0, 0, 0],
    [0, 131558114200 / 32700410799, -68118460800 / 10900136933, 87487479700 / 32700410799],
    [0, -1754552775 / 470086768, 14199869525 / 1410260304, -10690763975 / 1880347072],
    [0, 127303824393 / 49829197408, -318862633887 / 49829197408, 701980252875 / 199316789632],
    [0, -282668133 / 205662961, 2019193451 / 616988883, -1453857185 / 822651844],
    [0, 40617522 / 29380423, -110615467 / 29380423, 69997945 / 29380423]])

KIND_DOP853, KIND_DOPRI5, KIND_RK4 = 0, 1, 2
KINDS = {"dop853": KIND_DOP853, "dopri5": KIND_DOPRI5, "rk4": KIND_RK4}

# every tableau padded to 16 stages so one loop holds them all
_S = 16
A_ALL = np.zeros((3, _S, _S))
B_ALL = np.zeros((3, _S))
C_ALL = np.zeros((3, _S))
E_ALL = np.zeros((3, _S))  # DOP853: the 5th-order error weights; DOPRI5: its error weights
E3 = np.zeros(_S)  # DOP853's 3rd-order error weights
D853 = np.zeros((4, _S))  # DOP853's dense-output weights
P5 = np.zeros((_S, 4))  # DOPRI5's dense-output polynomial
STAGES = np.array([12, 6, 4])  # stages of the step (the stage after them is f at the new point)
ERROR_EXPONENT = np.array([-1.0 / 8.0, -1.0 / 5.0, 0.0])
A_ALL[0] = _D853.A
B_ALL[0, :12] = _D853.B
C_ALL[0] = _D853.C
E_ALL[0, :13] = _D853.E5
E3[:13] = _D853.E3
D853[:, :] = _D853.D
A_ALL[1, :6, :5] = _DP5_A
B_ALL[1, :6] = _DP5_B
C_ALL[1, :6] = _DP5_C
E_ALL[1, :7] = _DP5_E
P5[:7] = _DP5_P
A_ALL[2, 1, 0], A_ALL[2, 2, 1], A_ALL[2, 3, 2] = 0.5, 0.5, 1.0
B_ALL[2, :4] = 1.0 / 6.0, 1.0 / 3.0, 1.0 / 3.0, 1.0 / 6.0
C_ALL[2, :4] = 0.0, 0.5, 0.5, 1.0


def _nonzero_columns(weights):
    """For rows of weights: (the columns of each row's nonzero weights, padded, and their count). The
    sums run over these only: DOP853's stages 1 to 4 feed only the early stages (its step's sums, error
    and dense output hold 58 of 78, 8 of 13 and 12 of 16 weights a row). A zero weight's term adds
    exactly 0.0 to a finite sum, so the sums are the same to the bit as over every column."""
    rows = np.atleast_2d(weights)
    cols = np.zeros(rows.shape, dtype=np.int64)
    count = np.zeros(rows.shape[0], dtype=np.int64)
    for r, row in enumerate(rows):
        nz = np.flatnonzero(row)
        cols[r, :nz.size] = nz
        count[r] = nz.size
    return cols, count


A_COLS = np.zeros((3, _S, _S), dtype=np.int64)  # A_COLS[kind, s, :A_COUNT[kind, s]]: the nonzero a_sj
A_COUNT = np.zeros((3, _S), dtype=np.int64)
for _k in range(3):
    A_COLS[_k], A_COUNT[_k] = _nonzero_columns(A_ALL[_k])
B_COLS, B_COUNT = _nonzero_columns(B_ALL)
# DOP853's two error sums share their columns; DOPRI5's error its own (the rows beyond a kind's stages unread)
E_COLS, E_COUNT = _nonzero_columns(np.abs(E_ALL) + np.abs(E3) * (np.arange(3) == 0)[:, None])
D_COLS, D_COUNT = _nonzero_columns(np.abs(D853).sum(axis=0))
SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0
WORK_ROWS = 20  # erk_advance's work rows: the new point, three of scratch, the stages of sub-steps
# returned by the loops besides the status codes (status.py): the loop paused
PAUSED = -1
# a plane direction beyond +1 / -1 / 0: the turning points where normal . y has a maximum
TURNS_DOWN = 2


@inner
def _combine_full(kind, s, y, h, K, out):
    n = y.shape[0]
    A = A_ALL[kind]
    for i in range(n):
        acc = 0.0
        for j in range(s):  # zero weights too: a test per weight cost more than the product
            acc += A[s, j] * K[j, i]
        out[i] = y[i] + h * acc


@inner
def _combine(kind, s, y, h, K, out):
    """out = y + h sum_j a_sj K[j], over the nonzero a_sj (A_COLS: a test per weight cost more than the
    product)."""
    n = y.shape[0]
    A = A_ALL[kind]
    cols = A_COLS[kind, s]
    m = A_COUNT[kind, s]
    for i in range(n):
        acc = 0.0
        for q in range(m):
            j = cols[q]
            acc += A[s, j] * K[j, i]
        out[i] = y[i] + h * acc


@inner
def rk_step(f, kind, which, t, y, h, p, K, y_new, tmp):
    """One step from (t, y) with K[0] = f(t, y): y_new and K[stages] = f(t + h, y_new)."""
    C = C_ALL[kind]
    B = B_ALL[kind]
    s_n = STAGES[kind]
    for s in range(1, s_n):
        _combine_full(kind, s, y, h, K, tmp)
        f(which, t + C[s] * h, at(tmp), at(p), at(K[s]))
    n = y.shape[0]
    if kind == 2:  # classical RK4 in its textbook order of operations
        for i in range(n):
            y_new[i] = y[i] + h / 6.0 * (K[0, i] + 2.0 * K[1, i] + 2.0 * K[2, i] + K[3, i])
    else:
        for i in range(n):
            acc = 0.0
            for j in range(s_n):
                acc += B[j] * K[j, i]
            y_new[i] = y[i] + h * acc
    f(which, t + h, at(y_new), at(p), at(K[s_n]))


@noref
def error_norm(kind, h, y, y_new, K, rtol, atol):
    n = y.shape[0]
    E = E_ALL[kind]
    s_n = STAGES[kind] + 1
    e5 = 0.0
    e3 = 0.0
    for i in range(n):
        scale = atol + rtol * max(abs(y[i]), abs(y_new[i]))
        a = 0.0
        b = 0.0
        for j in range(s_n):
            a += E[j] * K[j, i]
            b += E3[j] * K[j, i]
        a /= scale
        b /= scale
        e5 += a * a
        e3 += b * b
    if kind == 0:
        if e5 == 0.0 and e3 == 0.0:
            return 0.0
        return abs(h) * e5 / math.sqrt((e5 + 0.01 * e3) * n)
    return abs(h) * math.sqrt(e5 / n)


@inner
def dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp):
    """Coefficients F of the step's dense output (evaluated by ``dense_value``)."""
    n = y.shape[0]
    if kind == 0:
        C = C_ALL[0]
        cols = D_COLS[0]
        m = D_COUNT[0]
        for s in range(13, 16):
            _combine(kind, s, y, h, K, tmp)
            f(which, t + C[s] * h, at(tmp), at(p), at(K[s]))
        for i in range(n):
            dy = y_new[i] - y[i]
            F[0, i] = dy
            F[1, i] = h * K[0, i] - dy
            F[2, i] = 2.0 * dy - h * (K[12, i] + K[0, i])
            a0 = 0.0  # the four rows' sums side by side: each stage read once, four chains in flight
            a1 = 0.0
            a2 = 0.0
            a3 = 0.0
            for q in range(m):
                j = cols[q]
                k = K[j, i]
                a0 += D853[0, j] * k
                a1 += D853[1, j] * k
                a2 += D853[2, j] * k
                a3 += D853[3, j] * k
            F[3, i] = h * a0
            F[4, i] = h * a1
            F[5, i] = h * a2
            F[6, i] = h * a3
    elif kind == 1:
        for i in range(n):
            for r in range(4):
                acc = 0.0
                for j in range(7):
                    acc += P5[j, r] * K[j, i]
                F[r, i] = h * acc
    else:
        for i in range(n):  # cubic Hermite through the step's ends and slopes
            F[0, i] = h * K[0, i]
            F[1, i] = 3.0 * (y_new[i] - y[i]) - h * (2.0 * K[0, i] + K[4, i])
            F[2, i] = -2.0 * (y_new[i] - y[i]) + h * (K[0, i] + K[4, i])


@inner
def dense_value(kind, F, y, x, out):
    """The dense output at x in [0, 1] of the step (fraction of the step)."""
    n = y.shape[0]
    if kind == 0:
        xm = 1.0 - x
        for i in range(n):
            acc = 0.0
            for r in range(6, -1, -1):
                acc += F[r, i]
                acc *= x if (6 - r) % 2 == 0 else xm
            out[i] = y[i] + acc
    elif kind == 1:
        for i in range(n):
            out[i] = y[i] + x * (F[0, i] + x * (F[1, i] + x * (F[2, i] + x * F[3, i])))
    else:
        for i in range(n):
            out[i] = y[i] + x * (F[0, i] + x * (F[1, i] + x * F[2, i]))


@inner
def _d853_at(F, i, x):
    """Component i of DOP853's dense output at x less the step's start, and its d/dx."""
    xm = 1.0 - x
    acc = 0.0
    dacc = 0.0
    for r in range(6, -1, -1):
        acc += F[r, i]
        if (6 - r) % 2 == 0:
            dacc = dacc * x + acc
            acc *= x
        else:
            dacc = dacc * xm - acc
            acc *= xm
    return acc, dacc


@noref
def dense_slope(kind, F, x, out):
    """d/dx of the dense output at x (the rate times the step)."""
    n = out.shape[0]
    if kind == 0:
        for i in range(n):
            out[i] = _d853_at(F, i, x)[1]
    elif kind == 1:
        for i in range(n):
            out[i] = F[0, i] + x * (2.0 * F[1, i] + x * (3.0 * F[2, i] + x * 4.0 * F[3, i]))
    else:
        for i in range(n):
            out[i] = F[0, i] + x * (2.0 * F[1, i] + x * 3.0 * F[2, i])


@noref
def dense_value_slope(kind, F, y, x, out, slope):
    """The dense output at x (``out``) and its d/dx (``slope``) in one pass."""
    if kind != 0:
        dense_value(kind, F, y, x, out)
        dense_slope(kind, F, x, slope)
        return
    for i in range(y.shape[0]):
        value, d = _d853_at(F, i, x)
        out[i] = y[i] + value
        slope[i] = d


@noref
def point_value(f, kind, which, t, y, h, p, F, K2, trusted, x, out, slope):
    """The solution at x (fraction of the step) into ``out`` (with ``slope``: its d/dx instead): off the
    dense output when the step's interpolant is ``trusted``, else from a step of x h from the step's
    start (K2[0] = f(t, y) set by the caller), as accurate as a step end."""
    if trusted:
        if slope:
            dense_slope(kind, F, x, out)
        else:
            dense_value(kind, F, y, x, out)
        return
    n = y.shape[0]
    s_n = STAGES[kind]
    if x == 0.0:
        for i in range(n):
            out[i] = h * K2[0, i] if slope else y[i]
        return
    rk_step(f, kind, which, t, y, x * h, p, K2, out, K2[15])
    if slope:
        for i in range(n):
            out[i] = h * K2[s_n, i]


@inner
def plane_value(f, kind, which, t, y, h, p, F, K2, trusted, x, normal, value, tmp, slope):
    """normal . y(x) - value at x (fraction of the step), or with ``slope`` its derivative in x."""
    point_value(f, kind, which, t, y, h, p, F, K2, trusted, x, tmp, slope)
    g = 0.0 if slope else -value
    for i in range(y.shape[0]):
        g += normal[i] * tmp[i]
    return g


@noref
def dense_root(f, kind, which, t, y, h, p, F, K2, trusted, normal, value, xa, ga, xb, gb, tmp, slope):
    """The zero on [xa, xb] of g = normal . y(x) - value (or, with ``slope``, of its derivative)
    where it changes sign: the Illinois method, the one root finder of the loops."""
    if ga == 0.0:
        return xa
    if gb == 0.0:
        return xb
    side = 0
    for _ in range(100):
        x = (xa * gb - xb * ga) / (gb - ga)
        if not (xa < x < xb) and not (xb < x < xa):
            x = 0.5 * (xa + xb)
        g = plane_value(f, kind, which, t, y, h, p, F, K2, trusted, x, normal, value, tmp, slope)
        if g == 0.0 or abs(xb - xa) <= 1e-15:
            return x
        if (g > 0.0) == (gb > 0.0):
            xb, gb = x, g
            if side == -1:
                ga *= 0.5
            side = -1
        else:
            xa, ga = x, g
            if side == 1:
                gb *= 0.5
            side = 1
    return 0.5 * (xa + xb)


# Where each read step's dense output is checked (fractions of the step), per kind: the first CHECK_COUNT[kind]
# entries of CHECK_AT[kind]. Measured against sub-steps to 49 points of every step (Lorenz at rtol 1e-9 and 1e-6,
# Van der Pol mu = 5 at 1e-4, 1e-6 and 1e-9, the stiff lag at its stability limit, the harmonic oscillator at
# 1e-5): DOP853's 7th-order output has almost no defect near 0.1 and 0.2 (its extra stages) whatever its error,
# and at 0.5 and 0.8 a defect 2 to 20 times below its error on non-stiff steps; at 0.7 the defect tracks the
# step's largest error over the step (median error / estimate 0.8 to 1.04, the largest 3.8), so one point there
# serves better than three. DOPRI5's quartic needs all three of 0.2, 0.5, 0.8.
CHECK_AT = np.array([[0.7, 0.0, 0.0], [0.2, 0.5, 0.8], [0.0, 0.0, 0.0]])
CHECK_COUNT = np.array([1, 3, 0])
# the dense output's error over h |defect| at those points. DOPRI5: 1/4 (medians 4.0 to 7.0 on Lorenz, Van der
# Pol, the Brusselator and the stiff lag at rtol 1e-6 and 1e-10; the smaller taken, so the estimate errs high).
# DOP853 at 0.7: the medians are about 1/8; 1/16 lets steps through whose estimate is up to twice the
# tolerance: on the problems above the largest error of a step let through was 2.2 times the tolerance (the
# three-point check it replaced let through 7 times), and 1 to 6% of Lorenz's steps are read by sub-steps.
DEFECT_TO_ERROR = np.array([1.0 / 16.0, 1.0 / 4.0, 0.0])


@inner
def interpolant_fits(f, kind, which, t, y, y_new, h, p, F, rtol, atol, tmp, tmp2, tmp3):
    """Whether the step's dense output meets the tolerance between the step's ends.

    The step's error control holds at its ends only. Between them the dense output misses the
    tolerance by up to 25 times on ordinary non-stiff flows at loose tolerances, and at the stability
    limit (a stiff component whose rate times h is near the edge of the stability region) Dormand-Prince
    8(5,3)'s 7th-order output misses by 30 while the ends are right. The check measures the defect
    r = u'(x) - f(u(x)) at CHECK_AT[kind]: an interpolant error of shape x^k (1 - x)^m has a slope about
    k + m times itself, so the error is about h |r| DEFECT_TO_ERROR[kind], slow and stiff components alike
    (a stiff component's error shows as its rate times itself, and |rate h| is bounded by stability)."""
    n = y.shape[0]
    ratio = DEFECT_TO_ERROR[kind]
    for c in range(CHECK_COUNT[kind]):
        x = CHECK_AT[kind, c]
        if kind == 0:  # DOP853's one point: its value and slope read here (a call cost more than the reading)
            for i in range(n):
                value, d = _d853_at(F, i, x)
                tmp[i] = y[i] + value
                tmp2[i] = d
        else:
            dense_value_slope(kind, F, y, x, tmp, tmp2)
        f(which, t + x * h, at(tmp), at(p), at(tmp3))
        e = 0.0
        for i in range(n):
            scale = atol + rtol * max(abs(y[i]), abs(y_new[i]))
            d = ratio * (tmp2[i] - h * tmp3[i]) / scale
            e += d * d
        if not (math.sqrt(e / n) <= 1.0):
            return False
    return True


@inner
def first_step(f, kind, which, t, y, p, K, direction, rtol, atol, max_step, tmp, tmp2):
    """A starting step (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4, as scipy's)."""
    if kind == 2:
        return max_step
    h0 = first_trial(any_layout(y), any_layout(K), direction, rtol, atol, max_step, tmp)
    f(which, t + h0 * direction, at(tmp), at(p), at(tmp2))
    return first_choice(kind, any_layout(y), any_layout(K), h0, tmp2, rtol, atol, max_step)


@noref
def first_trial(y, K, direction, rtol, atol, max_step, tmp):
    """``first_step``'s trial step h0, and tmp = the explicit Euler point there (f is wanted at it)."""
    n = y.shape[0]
    d0 = 0.0
    d1 = 0.0
    for i in range(n):
        scale = atol + abs(y[i]) * rtol
        d0 += (y[i] / scale) ** 2
        d1 += (K[0, i] / scale) ** 2
    d0 = math.sqrt(d0 / n)
    d1 = math.sqrt(d1 / n)
    h0 = 1e-6 if (d0 < 1e-5 or d1 < 1e-5) else 0.01 * d0 / d1
    h0 = min(h0, max_step)
    for i in range(n):
        tmp[i] = y[i] + h0 * direction * K[0, i]
    return h0


@noref
def first_choice(kind, y, K, h0, f1, rtol, atol, max_step):
    """``first_step``'s choice from the trial h0 and f1 = f at its Euler point."""
    n = y.shape[0]
    order = 8.0 if kind == 0 else 5.0
    d1 = 0.0
    d2 = 0.0
    for i in range(n):
        scale = atol + abs(y[i]) * rtol
        d1 += (K[0, i] / scale) ** 2
        d2 += ((f1[i] - K[0, i]) / scale) ** 2
    d1 = math.sqrt(d1 / n)
    d2 = math.sqrt(d2 / n) / h0 if h0 > 0.0 else math.inf  # h0 = 0: a slope beyond the float range (d1 = inf)
    if d1 <= 1e-15 and d2 <= 1e-15:
        h1 = max(1e-6, h0 * 1e-3)
    else:
        h1 = (0.01 / max(d1, d2)) ** (1.0 / order)
    h = min(100.0 * h0, h1, max_step)
    if not (h > 0.0) or not math.isfinite(h):
        h = 1e-6
    return h


@inner
def any_layout(a):
    """``a`` as a view typed with any layout (numba's 'A'): the helpers called both with whole arrays (a
    single run) and with members' columns (members.py: strided views) are then compiled once, not once
    per layout (two cold compiles)."""
    return a[::np.int64(1)]


@noref
def state_code(y, bound):
    """0 when every entry is finite and within the bound, 2 for NaN, 1 for a blow-up."""
    bad = 0
    for i in range(y.shape[0]):
        v = y[i]
        if v != v:
            return 2
        if not abs(v) <= bound:
            bad = 1
    return bad


@inner
def _event(f, kind, which, t, y, h, p, F, K2, trusted, x, k, ev_t, ev_y, ev_k, n_ev, tmp):
    """Record the crossing of plane k at x (fraction of the step) as event n_ev; returns n_ev + 1."""
    point_value(f, kind, which, t, y, h, p, F, K2, trusted, x, tmp, np.bool_(False))
    ev_t[n_ev] = t + x * h
    for i in range(y.shape[0]):
        ev_y[n_ev, i] = tmp[i]
    ev_k[n_ev] = k
    return n_ev + 1


@noref
def _read_step(f, kind, which, adaptive, t, y, y_new, h, p, K, F, K2, rtol, atol, tmp, tmp2, tmp3):
    """Ready the step for reading points inside it: its dense output, and whether that output is trusted
    (``interpolant_fits``); when not, points come from sub-steps (``point_value``) and K2[0] is set."""
    dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp)
    if not adaptive or interpolant_fits(f, kind, which, t, y, y_new, h, p, F, rtol, atol, tmp, tmp2, tmp3):
        return True
    for i in range(y.shape[0]):
        K2[0, i] = K[0, i]
    return False


@noref
def _save(st, t, h_abs, n_out, gi, n_ev):
    st[0] = t
    st[1] = h_abs
    st[5] = n_out
    st[6] = gi
    st[7] = n_ev


@inner
def read_samples(f, kind, which, t, t_new, h, direction, y, y_new, p, F, K2, trusted, tmp, grid, gi, out_t, out_y):
    """The samples at ``grid`` from index gi on inside the step (t, t_new] into out_t / out_y, off its
    dense output (``trusted``, as ``_read_step`` found) or from sub-steps; returns the next index."""
    n = y.shape[0]
    while gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0:
        x = (grid[gi] - t) / h
        if grid[gi] == t_new:
            for i in range(n):
                out_y[gi, i] = y_new[i]
        elif trusted:  # the common case read here directly: a call per sample cost a fifth of a step
            dense_value(kind, F, y, x, out_y[gi])
        else:
            point_value(f, kind, which, t, y, h, p, F, K2, trusted, x, tmp, np.bool_(False))
            for i in range(n):
                out_y[gi, i] = tmp[i]
        out_t[gi] = grid[gi]
        gi += 1
    return gi


@noref
def read_points(f, kind, which, adaptive, t, t_new, h, direction, y, y_new, p, K, F, K2, rtol, atol, tmps,
                grid, gi, out_t, out_y, planes, plane_dir, terminal, first, ev_t, ev_y, ev_k, n_ev):
    """The points read inside an accepted step (t, t_new]: samples at ``grid`` from index gi on (into
    out_t / out_y), crossings of the planes and turning points (events from n_ev on, ``first``: the
    run's first step, whose start on a plane is no crossing), off the step's dense output when it
    meets the tolerance, else from sub-steps (``tmps``: three rows of scratch). Returns (gi, n_ev, stop:
    a terminal plane crossed). Fewer than 30 arguments: numba cannot inline a call with more."""
    n = y.shape[0]
    tmp = tmps[0]
    tmp2 = tmps[1]
    tmp3 = tmps[2]
    s_n = STAGES[kind]
    n_planes = planes.shape[0]
    dense_ready = False
    trusted = True
    # samples on the grid inside (t, t_new]
    if gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0:
        trusted = _read_step(f, kind, which, adaptive, t, y, y_new, h, p, K, F, K2, rtol, atol, tmp, tmp2, tmp3)
        dense_ready = True
        gi = read_samples(f, kind, which, t, t_new, h, direction, y, y_new, p, F, K2, trusted, tmp, grid, gi, out_t,
                          out_y)
    stop = False
    for k in range(n_planes):
        ga = -planes[k, n]
        gb = -planes[k, n]
        ra = 0.0
        rb = 0.0
        size = abs(planes[k, n])
        for i in range(n):
            ga += planes[k, i] * y[i]
            gb += planes[k, i] * y_new[i]
            ra += planes[k, i] * K[0, i]
            rb += planes[k, i] * K[s_n, i]
            size += abs(planes[k, i] * y[i])
        if plane_dir[k] == TURNS_DOWN:  # maxima of normal . y: its rate goes from + to -
            if ra > 0.0 and rb <= 0.0 and n_ev < ev_t.shape[0]:
                if not dense_ready:
                    trusted = _read_step(f, kind, which, adaptive, t, y, y_new, h, p, K, F, K2, rtol, atol, tmp,
                                         tmp2, tmp3)
                    dense_ready = True
                x = dense_root(f, kind, which, t, y, h, p, F, K2, trusted, planes[k, :n], 0.0, 0.0, ra * h, 1.0, rb * h, tmp, np.bool_(True))
                n_ev = _event(f, kind, which, t, y, h, p, F, K2, trusted, x, k, ev_t, ev_y, ev_k, n_ev, tmp)
                if terminal[k]:
                    stop = True
            continue
        if first and abs(ga) <= 1e-14 * size:  # the start on the plane to round-off is no crossing
            ga = 0.0
        if (ra > 0.0) == (rb > 0.0) and not ((ga < 0.0) != (gb < 0.0) or (gb == 0.0 and ga != 0.0)):
            continue
        if not dense_ready:
            trusted = _read_step(f, kind, which, adaptive, t, y, y_new, h, p, K, F, K2, rtol, atol, tmp, tmp2,
                                 tmp3)
            dense_ready = True
        # the rate turns inside the step: split it where g turns (a near-grazing pass crosses twice)
        x_turn = 1.0
        if (ra > 0.0) != (rb > 0.0):
            x_turn = dense_root(f, kind, which, t, y, h, p, F, K2, trusted, planes[k, :n], 0.0, 0.0, ra * h, 1.0, rb * h, tmp, np.bool_(True))
        pieces = 1 if x_turn <= 0.0 or x_turn >= 1.0 else 2
        xa = 0.0
        g_left = ga
        for m in range(1, pieces + 1):
            xb = 1.0 if m == pieces else x_turn
            g_right = gb if m == pieces else plane_value(f, kind, which, t, y, h, p, F, K2, trusted, xb, planes[k, :n], planes[k, n], tmp, np.bool_(False))
            crossed = (g_left < 0.0) != (g_right < 0.0) or (g_right == 0.0 and g_left != 0.0)
            if crossed and g_left != 0.0:
                rising = g_right > g_left
                if plane_dir[k] == 0 or (plane_dir[k] > 0) == rising:
                    if n_ev < ev_t.shape[0]:
                        x = dense_root(f, kind, which, t, y, h, p, F, K2, trusted, planes[k, :n], planes[k, n], xa, g_left, xb, g_right, tmp,
                                       np.bool_(False))
                        n_ev = _event(f, kind, which, t, y, h, p, F, K2, trusted, x, k, ev_t, ev_y, ev_k, n_ev, tmp)
                        if terminal[k]:
                            stop = True
            xa = xb
            g_left = g_right
    return gi, n_ev, stop


@noref
def erk_advance(f, kind, which, adaptive, y, p, K, F, W, st, t_end, rtol, atol, max_step, bound,
                grid, out_t, out_y, every_step, planes, plane_dir, terminal, ev_t, ev_y, ev_k,
                max_steps):
    """Advance one trajectory of ``f(which, ...)`` from st[0] = t, y (in place) towards t_end for at most ``max_steps``
    steps.

    ``W`` (WORK_ROWS, n): work rows (the loop makes no arrays: it is compiled without reference counting).
    ``st``: [t, h (next step, 0 before the first), accepted, rejected, last step rejected,
    outputs written, grid index, events written, -, -, -, y changed by the caller]. Samples at ``grid`` times (ordered in the
    direction of time) are read off each step's dense output; with ``every_step`` each accepted
    step's end goes to ``out_t``/``out_y`` instead. Crossings of the planes ``planes[k, :n] . y =
    planes[k, n]`` in direction ``plane_dir[k]`` (+1 rising, -1 falling, 0 both; TURNS_DOWN: the
    maxima of ``planes[k, :n] . y`` instead) are located on the dense output by ``dense_root``; a crossing of a ``terminal`` plane ends the run. Returns a
    status code (status.py) or PAUSED when the step budget or an output buffer ran out.
    """
    n = y.shape[0]
    t = st[0]
    direction = 1.0 if t_end > t else -1.0
    s_n = STAGES[kind]
    y_new = W[0]
    tmps = W[1:4]
    tmp = tmps[0]
    tmp2 = tmps[1]
    K2 = W[4:20]  # the stages of sub-steps to points of an untrusted interpolant
    n_out = int(st[5])
    gi = int(st[6])
    n_ev = int(st[7])
    n_planes = planes.shape[0]
    if st[1] == 0.0:
        f(which, t, at(y), at(p), at(K[0]))
        code = state_code(any_layout(K[0]), math.inf)
        if code == 2:
            return 2
        st[1] = first_step(f, kind, which, t, y, p, K, direction, rtol, atol, max_step, tmp, tmp2) if adaptive else max_step
    elif st[11] != 0.0:  # the caller changed y since the last call
        f(which, t, at(y), at(p), at(K[0]))
    st[11] = 0.0
    h_abs = st[1]
    exponent = ERROR_EXPONENT[kind]
    steps = 0
    while True:
        if (t_end - t) * direction <= 1e-13 * max(1.0, abs(t_end)):
            _save(st, t, h_abs, n_out, gi, n_ev)
            return 0
        if steps >= max_steps or (every_step and n_out >= out_t.shape[0]) or n_ev >= ev_t.shape[0]:
            _save(st, t, h_abs, n_out, gi, n_ev)
            return PAUSED
        min_step = 10.0 * abs(np.nextafter(t, direction * math.inf) - t)
        h_try = min(h_abs, max_step)
        if h_try < min_step:
            h_try = min_step
        t_new = t + direction * h_try
        clamped = False
        if (t_new - t_end) * direction > 0.0 or (t_end - t_new) * direction <= 1e-13 * max(1.0, abs(t_end)):
            t_new = t_end
            clamped = True
        h = t_new - t
        rk_step(f, kind, which, t, y, h, p, K, y_new, tmp)
        if adaptive:
            err = error_norm(kind, h, any_layout(y), any_layout(y_new), any_layout(K), rtol, atol)
            if not (err <= 1.0):  # rejected, or NaN
                st[3] += 1
                factor = MIN_FACTOR if err != err else max(MIN_FACTOR, SAFETY * err ** exponent)
                h_abs = abs(h) * factor
                st[4] = 1.0
                if h_abs < min_step:
                    _save(st, t, h_abs, n_out, gi, n_ev)
                    return 2 if state_code(any_layout(y_new), bound) == 2 else 3
                continue
            factor = MAX_FACTOR if err == 0.0 else min(MAX_FACTOR, SAFETY * err ** exponent)
            if st[4] != 0.0:
                factor = min(1.0, factor)
            st[4] = 0.0
            h_next = abs(h) * factor
            if clamped:  # a step shortened to land on t_end says nothing against the longer one
                h_next = max(h_next, h_try)
        else:
            h_next = h_abs
        code = state_code(any_layout(y_new), bound)
        if code == 0:
            code = 2 if state_code(any_layout(K[s_n]), math.inf) == 2 else 0
        if code != 0:
            _save(st, t, h_abs, n_out, gi, n_ev)
            return code
        steps += 1
        st[2] += 1
        stop = False
        if n_planes == 0:  # samples only (most runs): read here; a call of read_points (29 arguments, most of
            # them arrays passed field by field) cost about 100 ns a sampled step, a fifth of the step
            if gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0:
                trusted = _read_step(f, kind, which, adaptive, t, y, y_new, h, p, K, F, K2, rtol, atol, tmp, tmp2,
                                     tmps[2])
                gi = read_samples(f, kind, which, t, t_new, h, direction, y, y_new, p, F, K2, trusted, tmp, grid, gi,
                                  out_t, out_y)
                n_out = gi
        else:
            gi_before = gi
            gi, n_ev, stop = read_points(f, kind, which, adaptive, t, t_new, h, direction, y, y_new, p, K, F, K2, rtol,
                                         atol, tmps, grid, gi, out_t, out_y, planes, plane_dir, terminal, st[2] == 1.0,
                                         ev_t, ev_y, ev_k, n_ev)
            if gi != gi_before:
                n_out = gi
        if every_step:
            out_t[n_out] = t_new
            for i in range(n):
                out_y[n_out, i] = y_new[i]
            n_out += 1
        for i in range(n):
            y[i] = y_new[i]
            K[0, i] = K[s_n, i]
        t = t_new
        h_abs = h_next
        if stop:
            _save(st, t, h_abs, n_out, gi, n_ev)
            return 0


@noref
def evaluate(f, which, t, z, p, out):
    """The kernel once, called from Python (the stiff solvers' right-hand side)."""
    f(which, t, at(z), at(p), at(out))


@loop
def erk_dense_prepare(f, kind, which, t, y, y_new, h, p, K, F):
    """The dense-output coefficients F of a step erk_advance took from (t, y) to y_new, from its
    stages K (as the step left them, with K[0] set back to f(t, y)); read off by ``erk_dense_at``."""
    tmp = np.empty(y.shape[0])
    dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp)


@noref
def erk_dense_at(kind, F, y, xs, out):
    """The dense output at the fractions ``xs`` of the step from y (out: len(xs) x n)."""
    for j in range(xs.shape[0]):
        dense_value(kind, F, y, xs[j], out[j])
