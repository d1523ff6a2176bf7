"""Explicit Runge-Kutta methods: Dormand-Prince 8(5,3) with its 7th-order dense output,
Dormand-Prince 5(4) with its quartic dense output, and classical RK4 (fixed step, cubic Hermite
dense output) — one loop for all three.

Tableaux: Dormand & Prince (1980) and Prince & Dormand (1981) as printed in Hairer, Norsett &
Wanner, Solving ODEs I (2nd ed.), sec. II.5 and II.6, taken from scipy's ``RK45`` and
``dop853_coefficients``. Error control as there: a step is accepted when the scaled error norm is
at most 1 (scale ``atol + rtol * max(|y|, |y_new|)``), the next step is ``h * min(10, max(0.2,
0.9 * err^(-1/(q+1))))`` and never grows right after a rejection. DOP853 estimates its error with
the 5th- and 3rd-order combination of the Fortran code.

The model's kernel ``f(which, t, z, p, out)`` (``codegen.py``: the right-hand side, with ``which``
tangent vectors the variational equations too) comes in as an argument; the loops are compiled
once (``jitting.loop``) for every model.
"""

import math

import numpy as np
from scipy.integrate import RK45 as _RK45
from scipy.integrate._ivp import dop853_coefficients as _D853

from orbitdesk.engine.jitting import inner, loop

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
A_ALL[1, :6, :5] = _RK45.A
B_ALL[1, :6] = _RK45.B
C_ALL[1, :6] = _RK45.C
E_ALL[1, :7] = _RK45.E
P5[:7] = _RK45.P
A_ALL[2, 1, 0], A_ALL[2, 2, 1], A_ALL[2, 3, 2] = 0.5, 0.5, 1.0
B_ALL[2, :4] = 1.0 / 6.0, 1.0 / 3.0, 1.0 / 3.0, 1.0 / 6.0
C_ALL[2, :4] = 0.0, 0.5, 0.5, 1.0
SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0
# returned by the loops besides the status codes (status.py): the loop paused
PAUSED = -1
# a plane direction beyond +1 / -1 / 0: the turning points where normal . y has a maximum
TURNS_DOWN = 2


@inner
def _combine(A, s, y, h, K, out):
    n = y.shape[0]
    for i in range(n):
        acc = 0.0
        for j in range(s):
            a = A[s, j]
            if a != 0.0:
                acc += a * K[j, i]
        out[i] = y[i] + h * acc


@inner
def rk_step(f, kind, which, t, y, h, p, K, y_new, tmp):
    """One step from (t, y) with K[0] = f(t, y): y_new and K[stages] = f(t + h, y_new)."""
    A = A_ALL[kind]
    C = C_ALL[kind]
    B = B_ALL[kind]
    s_n = STAGES[kind]
    for s in range(1, s_n):
        _combine(A, s, y, h, K, tmp)
        f(which, t + C[s] * h, tmp, p, K[s])
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
    f(which, t + h, y_new, p, K[s_n])


@inner
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
        A = A_ALL[0]
        C = C_ALL[0]
        for s in range(13, 16):
            _combine(A, s, y, h, K, tmp)
            f(which, t + C[s] * h, tmp, p, K[s])
        for i in range(n):
            dy = y_new[i] - y[i]
            F[0, i] = dy
            F[1, i] = h * K[0, i] - dy
            F[2, i] = 2.0 * dy - h * (K[12, i] + K[0, i])
            for r in range(4):
                acc = 0.0
                for j in range(16):
                    acc += D853[r, j] * K[j, i]
                F[3 + r, i] = h * acc
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
    for i in range(n):
        if kind == 0:
            acc = 0.0
            for r in range(6, -1, -1):
                acc += F[r, i]
                acc *= x if (6 - r) % 2 == 0 else 1.0 - x
            out[i] = y[i] + acc
        elif kind == 1:
            out[i] = y[i] + x * (F[0, i] + x * (F[1, i] + x * (F[2, i] + x * F[3, i])))
        else:
            out[i] = y[i] + x * (F[0, i] + x * (F[1, i] + x * F[2, i]))


@inner
def dense_slope(kind, F, x, out):
    """d/dx of the dense output at x (the rate times the step)."""
    n = out.shape[0]
    for i in range(n):
        if kind == 0:
            acc = 0.0
            dacc = 0.0
            for r in range(6, -1, -1):
                acc += F[r, i]
                if (6 - r) % 2 == 0:
                    dacc = dacc * x + acc
                    acc *= x
                else:
                    dacc = dacc * (1.0 - x) - acc
                    acc *= 1.0 - x
            out[i] = dacc
        elif kind == 1:
            out[i] = F[0, i] + x * (2.0 * F[1, i] + x * (3.0 * F[2, i] + x * 4.0 * F[3, i]))
        else:
            out[i] = F[0, i] + x * (2.0 * F[1, i] + x * 3.0 * F[2, i])


@inner
def plane_value(kind, F, y, x, normal, value, tmp, slope):
    """normal . y(x) - value on the dense output, or with ``slope`` its derivative in x."""
    if slope:
        dense_slope(kind, F, x, tmp)
        g = 0.0
    else:
        dense_value(kind, F, y, x, tmp)
        g = -value
    for i in range(y.shape[0]):
        g += normal[i] * tmp[i]
    return g


@inner
def dense_root(kind, F, y, normal, value, xa, ga, xb, gb, tmp, slope):
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
        g = plane_value(kind, F, y, x, normal, value, tmp, slope)
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


@inner
def first_step(f, kind, which, t, y, p, K, direction, rtol, atol, max_step, tmp, tmp2):
    """A starting step (Hairer, Norsett & Wanner, Solving ODEs I, sec. II.4, as scipy's)."""
    n = y.shape[0]
    if kind == 2:
        return max_step
    order = 8.0 if kind == 0 else 5.0
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
    f(which, t + h0 * direction, tmp, p, tmp2)
    d2 = 0.0
    for i in range(n):
        scale = atol + abs(y[i]) * rtol
        d2 += ((tmp2[i] - K[0, i]) / scale) ** 2
    d2 = math.sqrt(d2 / n) / h0
    if d1 <= 1e-15 and d2 <= 1e-15:
        h1 = max(1e-6, h0 * 1e-3)
    else:
        h1 = (0.01 / max(d1, d2)) ** (1.0 / order)
    h = min(100.0 * h0, h1, max_step)
    if not (h > 0.0) or not math.isfinite(h):
        h = 1e-6
    return h


@inner
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
def _event(kind, F, y, x, t, h, k, ev_t, ev_y, ev_k, n_ev, tmp):
    """Record the crossing of plane k at x (fraction of the step) as event n_ev; returns n_ev + 1."""
    dense_value(kind, F, y, x, tmp)
    ev_t[n_ev] = t + x * h
    for i in range(y.shape[0]):
        ev_y[n_ev, i] = tmp[i]
    ev_k[n_ev] = k
    return n_ev + 1


@inner
def _save(st, t, h_abs, n_out, gi, n_ev):
    st[0] = t
    st[1] = h_abs
    st[5] = n_out
    st[6] = gi
    st[7] = n_ev


@loop
def erk_advance(f, kind, which, adaptive, y, p, K, F, st, t_end, rtol, atol, max_step, bound,
                grid, out_t, out_y, every_step, planes, plane_dir, terminal, ev_t, ev_y, ev_k,
                max_steps):
    """Advance one trajectory of ``f(which, ...)`` from st[0] = t, y (in place) towards t_end for at most ``max_steps``
    steps.

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
    y_new = np.empty(n)
    tmp = np.empty(n)
    tmp2 = np.empty(n)
    n_out = int(st[5])
    gi = int(st[6])
    n_ev = int(st[7])
    n_planes = planes.shape[0]
    if st[1] == 0.0:
        f(which, t, y, p, K[0])
        code = state_code(K[0], math.inf)
        if code == 2:
            return 2
        st[1] = first_step(f, kind, which, t, y, p, K, direction, rtol, atol, max_step, tmp, tmp2) if adaptive else max_step
    elif st[11] != 0.0:  # the caller changed y since the last call
        f(which, t, y, p, K[0])
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
            err = error_norm(kind, h, y, y_new, K, rtol, atol)
            if not (err <= 1.0):  # rejected, or NaN
                st[3] += 1
                factor = MIN_FACTOR if err != err else max(MIN_FACTOR, SAFETY * err ** exponent)
                h_abs = abs(h) * factor
                st[4] = 1.0
                if h_abs < min_step:
                    _save(st, t, h_abs, n_out, gi, n_ev)
                    return 2 if state_code(y_new, bound) == 2 else 3
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
        code = state_code(y_new, bound)
        if code == 0:
            code = 2 if state_code(K[s_n], math.inf) == 2 else 0
        if code != 0:
            _save(st, t, h_abs, n_out, gi, n_ev)
            return code
        steps += 1
        st[2] += 1
        dense_ready = False
        # samples on the grid inside (t, t_new]
        while gi < grid.shape[0] and (grid[gi] - t_new) * direction <= 0.0:
            if not dense_ready:
                dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp)
                dense_ready = True
            x = (grid[gi] - t) / h
            if grid[gi] == t_new:
                for i in range(n):
                    out_y[gi, i] = y_new[i]
            else:
                dense_value(kind, F, y, x, tmp)
                for i in range(n):
                    out_y[gi, i] = tmp[i]
            out_t[gi] = grid[gi]
            gi += 1
            n_out = gi
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
                        dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp)
                        dense_ready = True
                    x = dense_root(kind, F, y, planes[k, :n], 0.0, 0.0, ra * h, 1.0, rb * h, tmp, True)
                    n_ev = _event(kind, F, y, x, t, h, k, ev_t, ev_y, ev_k, n_ev, tmp)
                    if terminal[k]:
                        stop = True
                continue
            if st[2] == 1.0 and abs(ga) <= 1e-14 * size:  # the start on the plane to round-off is no crossing
                ga = 0.0
            if (ra > 0.0) == (rb > 0.0) and not ((ga < 0.0) != (gb < 0.0) or (gb == 0.0 and ga != 0.0)):
                continue
            if not dense_ready:
                dense_coefficients(f, kind, which, t, y, y_new, h, p, K, F, tmp)
                dense_ready = True
            # the rate turns inside the step: split it where g turns (a near-grazing pass crosses twice)
            x_turn = 1.0
            if (ra > 0.0) != (rb > 0.0):
                x_turn = dense_root(kind, F, y, planes[k, :n], 0.0, 0.0, ra * h, 1.0, rb * h, tmp, True)
            pieces = 1 if x_turn <= 0.0 or x_turn >= 1.0 else 2
            xa = 0.0
            g_left = ga
            for m in range(1, pieces + 1):
                xb = 1.0 if m == pieces else x_turn
                g_right = gb if m == pieces else plane_value(kind, F, y, xb, planes[k, :n], planes[k, n], tmp, False)
                crossed = (g_left < 0.0) != (g_right < 0.0) or (g_right == 0.0 and g_left != 0.0)
                if crossed and g_left != 0.0:
                    rising = g_right > g_left
                    if plane_dir[k] == 0 or (plane_dir[k] > 0) == rising:
                        if n_ev < ev_t.shape[0]:
                            x = dense_root(kind, F, y, planes[k, :n], planes[k, n], xa, g_left, xb, g_right, tmp, False)
                            n_ev = _event(kind, F, y, x, t, h, k, ev_t, ev_y, ev_k, n_ev, tmp)
                            if terminal[k]:
                                stop = True
                xa = xb
                g_left = g_right
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
