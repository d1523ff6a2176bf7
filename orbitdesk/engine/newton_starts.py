"""Multi-start Newton: one damped Newton iteration run from a block of starts at once, on the model's
batched kernel (``batch``: the starts are its members, in columns), with its own status per start.

Each start solves G(x) = 0 with G = f (a flow's equilibria) or G = f^k(x) - x (a map's fixed points,
k = 1, and its cycles of period k): the Jacobian DG comes from the kernel's tangent vectors started
as the identity (``which = n``: J V = J), multiplied along the k iterates for a map. Every
iteration of every start solves DG dx = -G by Gaussian elimination with partial pivoting (dense LU,
in place, no array made) and tries x + lam dx for lam = 1, 1/2, ... down to ``min_damping``, taking
the first trial that lowers |G|; where DG is exactly singular the step is the regularised
least-squares one, (DG^T DG + mu I) dx = -DG^T G with mu = 1e-12 |DG|_F^2 (a point on a curve of
equilibria is still reached). Where no damping helps (a valley of |G| that Newton's direction
leaves), the start takes Levenberg-Marquardt steps (mu from 1e-4 |DG|_F^2, times 10 while they fail,
a tenth after each success, back to Newton below 1e-4; at most TURNS times per start): from the same
starts this finds as many equilibria as Powell's hybrid method did or more, not always the same ones
where there are many (Lorenz-96 at 16 states: 31 from 200 starts against 14, 9 of those among them). The rules of ``analyses/newton.damped_newton``, start by start:

* converged (``C_OK``): |G| <= ftol + frel max(1, |x|_inf) before an iteration, or an accepted
  step no longer than xtol max(1, |x|_2), or a full step that shrank to that size and no longer
  lowers |G| (the rounding level); the step size kept is 0 where G is exactly 0;
* ``C_UNDEFINED``: G at the start, or DG at an accepted point, is not a finite number;
* ``C_DIVERGED``: the iterate left the box |x|_inf <= ``bound``;
* ``C_SINGULAR``: DG was singular and the regularised step lowered |G| at no damping;
* ``C_STALLED``: no trial lowered |G| (a minimum of |G| that is no root), ``slow`` full steps in
  a row shrank by less than 5% (a root at infinity), or the iterations ran out.

The starts still iterating are gathered into the first columns of the kernel's block before each
call, so a start that has finished costs nothing. Plain Python (no numba, or ORBITDESK_NO_JIT) runs
the same loop with each block helper replaced by its numpy version over the whole block
(``jitting.numpy_version``; the solves are numpy's stacked LU), so the fallback is vectorised over
the starts too. The Python side (``newton_starts``, at the end) cuts the starts into blocks,
reports progress and polls cancel between them.
"""

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from orbitdesk.engine.jitting import inner, loop, noref, numpy_version
from orbitdesk.engine.status import C_DIVERGED, C_OK, C_SINGULAR, C_STALLED, C_UNDEFINED, WORD

RUNNING = -1  # a start's code while it iterates (and for starts never run)
# rows of S, the per-start numbers
NS_NORM, NS_STEP, NS_TRIED, NS_LAM, NS_LAST, NS_SLOW, NS_ITER, NS_REG, NS_MU, NS_TURNS = range(10)
NS_ROWS = 10
REGULARISED = 1e-12  # mu / |DG|_F^2 of the least-squares step where DG is singular
MARQUARDT, MARQUARDT_MAX = 1e-4, 1e2  # mu / |DG|_F^2 of the first and last Levenberg-Marquardt trials
TURNS = 3  # a start turns to Levenberg-Marquardt steps at most this many times; its next stall ends it
NEAR = 1.5e-8  # a full Newton step this small (relative to |x|) that lowers |G| at no damping: the rounding level


# ---------------------------------------------------------------- block helpers (numba, and numpy)
def _nt_gather_numpy(X, IDX, s, Z, n):
    Z[:n, :s] = X[:, IDX[:s]]


@noref
@numpy_version(_nt_gather_numpy)
def _nt_gather(X, IDX, s, Z, n):
    """Z[:n, j] = X[:, IDX[j]] for the first s columns."""
    for i in range(n):
        for j in range(s):
            Z[i, j] = X[i, IDX[j]]


def _nt_trial_numpy(X, D, S, IDX, s, Z, XN, n):
    c = IDX[:s]
    XN[:, :s] = X[:, c] + S[NS_LAM, c] * D[:, c]
    Z[:n, :s] = XN[:, :s]


@noref
@numpy_version(_nt_trial_numpy)
def _nt_trial(X, D, S, IDX, s, Z, XN, n):
    """The trial points x + lam dx of the starts IDX[:s], into XN and the kernel's block Z."""
    for j in range(s):
        c = IDX[j]
        lam = S[NS_LAM, c]
        for i in range(n):
            v = X[i, c] + lam * D[i, c]
            XN[i, j] = v
            Z[i, j] = v


def _nt_identity_numpy(Z, n, s):
    Z[n:n + n * n, :s] = np.eye(n).reshape(n * n, 1)


@noref
@numpy_version(_nt_identity_numpy)
def _nt_identity(Z, n, s):
    """The tangent rows of the first s columns of Z set to the identity (row by row)."""
    for i in range(n):
        for q in range(n):
            v = 1.0 if i == q else 0.0
            for j in range(s):
                Z[n + i * n + q, j] = v


def _nt_copy_rows_numpy(OUT, Z, rows, s):
    Z[:rows, :s] = OUT[:rows, :s]


@noref
@numpy_version(_nt_copy_rows_numpy)
def _nt_copy_rows(OUT, Z, rows, s):
    """Z[:rows, :s] = OUT[:rows, :s]: the next iterate of a map (with its tangent vectors)."""
    for i in range(rows):
        for j in range(s):
            Z[i, j] = OUT[i, j]


def _nt_residuals_numpy(OUT, XN, k, n, s, RN, NN):
    RN[:, :s] = OUT[:n, :s] - XN[:, :s] if k else OUT[:n, :s]
    with np.errstate(all="ignore"):
        NN[:s] = np.sqrt(np.sum(RN[:, :s] * RN[:, :s], axis=0))
    NN[:s][~np.all(np.isfinite(RN[:, :s]), axis=0)] = math.inf


@noref
@numpy_version(_nt_residuals_numpy)
def _nt_residuals(OUT, XN, k, n, s, RN, NN):
    """RN[:, j] = G at the j-th point (f, or for a map f^k(x) - x with x = XN[:, j]); NN[j] its norm
    (infinite when a value is not finite)."""
    for j in range(s):
        total = 0.0
        finite = True
        for i in range(n):
            v = OUT[i, j] - XN[i, j] if k != 0 else OUT[i, j]
            RN[i, j] = v
            if not math.isfinite(v):
                finite = False
            total += v * v
        NN[j] = math.sqrt(total) if finite else math.inf


def _nt_active_numpy(CODE, IDX, count):
    found = np.flatnonzero(CODE[:count] == RUNNING)
    IDX[:found.size] = found
    return found.size


@noref
@numpy_version(_nt_active_numpy)
def _nt_active(CODE, IDX, count):
    """The starts still iterating, listed in IDX; their number."""
    a = 0
    for c in range(count):
        if CODE[c] == RUNNING:
            IDX[a] = c
            a += 1
    return a


@noref
def _nt_lu_solve(A, b, n):
    """A x = b by Gaussian elimination with partial pivoting, in place (A is overwritten, b becomes
    x). False when a pivot is 0 or a value is not finite."""
    for j in range(n):
        p = j
        big = abs(A[j, j])
        for i in range(j + 1, n):
            if abs(A[i, j]) > big:
                big = abs(A[i, j])
                p = i
        if not (big > 0.0 and math.isfinite(big)):
            return False
        if p != j:
            for q in range(j, n):
                A[j, q], A[p, q] = A[p, q], A[j, q]
            b[j], b[p] = b[p], b[j]
        pivot = A[j, j]
        for i in range(j + 1, n):
            m = A[i, j] / pivot
            if m != 0.0:
                for q in range(j + 1, n):
                    A[i, q] -= m * A[j, q]
                b[i] -= m * b[j]
    for i in range(n - 1, -1, -1):
        v = b[i]
        for q in range(i + 1, n):
            v -= A[i, q] * b[q]
        b[i] = v / A[i, i]
        if not math.isfinite(b[i]):
            return False
    return True


@noref
def _nt_load_jacobian(OUT, j, n, k, A):
    """DG of the j-th column of the kernel's output into A (minus the identity for a map); False when
    an entry is not finite."""
    for i in range(n):
        for q in range(n):
            v = OUT[n + i * n + q, j]
            if not math.isfinite(v):
                return False
            A[i, q] = v - 1.0 if (k != 0 and i == q) else v
    return True


def solve_stack(M, b):
    """M[q] x[q] = b[q] for a stack, by numpy's LU; NaN rows where M[q] is singular."""
    try:
        return np.linalg.solve(M, b[..., None])[..., 0]
    except np.linalg.LinAlgError:  # one of them is singular: each on its own
        found = np.full(b.shape, np.nan)
        for q in range(b.shape[0]):
            try:
                found[q] = np.linalg.solve(M[q], b[q])
            except np.linalg.LinAlgError:
                pass
        return found


def _solve_each_numpy(M, B, count):
    B[:count] = solve_stack(M[:count], B[:count])
    return 0


@loop
@numpy_version(_solve_each_numpy)
def solve_each(M, B, count):
    """M[q] x = B[q] for q < count, x written into B[q] (M overwritten by its LU), a row of NaN where M[q]
    is singular or a value is not finite: ``_nt_lu_solve``, one matrix after the other, for callers in
    Python (the shooting's Newton systems). No threads: numpy's LAPACK solve of one 101 x 101 matrix spun
    its threads for 90 ms on the loaded 2-core machine, this loop takes about a millisecond (plain
    Python: ``solve_stack``)."""
    n = M.shape[1]
    for q in range(count):
        if not _nt_lu_solve(M[q], B[q], n):
            for i in range(n):
                B[q, i] = math.nan
    return 0


def _nt_directions_numpy(OUT, R, IDX, a, n, k, S, D, CODE, A, B, w):
    c = IDX[:a]
    J = np.ascontiguousarray(OUT[n:n + n * n, :a].T).reshape(a, n, n)
    if k:
        J = J - np.eye(n)
    finite = np.all(np.isfinite(J), axis=(1, 2))
    CODE[c[~finite]] = C_UNDEFINED
    J, c = J[finite], c[finite]
    S[NS_LAM, c] = 1.0
    rhs = -R[:, c].T
    steps = np.full((c.size, n), np.nan)
    mu = S[NS_MU, c].copy()
    newton = mu == 0.0
    with np.errstate(all="ignore"):
        if np.any(newton):
            steps[newton] = solve_stack(J[newton], rhs[newton])
            singular = newton & ~np.all(np.isfinite(steps), axis=1)
            S[NS_REG, c[newton]] = 0.0
            S[NS_REG, c[singular]] = 1.0
            mu[singular] = REGULARISED
        marquardt = mu > 0.0
        if np.any(marquardt):  # (J^T J + mu |J|_F^2 I) dx = -J^T G, as the compiled loop takes it
            Js = J[marquardt]
            JT = np.transpose(Js, (0, 2, 1))
            size = mu[marquardt] * np.sum(Js * Js, axis=(1, 2))
            M = JT @ Js + size[:, None, None] * np.eye(n)
            steps[marquardt] = solve_stack(M, (JT @ rhs[marquardt][..., None])[..., 0])
    good = np.all(np.isfinite(steps), axis=1)
    CODE[c[~good]] = C_SINGULAR
    D[:, c[good]] = steps[good].T
    S[NS_TRIED, c[good]] = np.sqrt(np.sum(steps[good] ** 2, axis=1))


@noref
def _nt_direction(OUT, j, c, n, k, R, S, D, CODE, A, B, w):
    """The direction dx (D[:, c]) of start c from DG in column j of the kernel's output and G in
    R[:, c]: Newton's, or where S[NS_MU, c] = mu > 0 (or DG is singular: S[NS_REG] = 1, mu =
    REGULARISED) Levenberg-Marquardt's, (DG^T DG + mu |DG|_F^2 I) dx = -DG^T G; the code
    C_UNDEFINED / C_SINGULAR where none is finite. A, B (n x n) and w (n) are work."""
    S[NS_LAM, c] = 1.0
    if not _nt_load_jacobian(OUT, j, n, k, A):
        CODE[c] = C_UNDEFINED
        return
    for i in range(n):
        w[i] = -R[i, c]
    mu = S[NS_MU, c]
    if mu == 0.0:
        if _nt_lu_solve(A, w, n):
            S[NS_REG, c] = 0.0
            _nt_store(w, n, c, S, D)
            return
        S[NS_REG, c] = 1.0
        mu = REGULARISED
        _nt_load_jacobian(OUT, j, n, k, A)
    size = 0.0
    for i in range(n):
        for q in range(n):
            size += A[i, q] * A[i, q]
    for i in range(n):
        v = 0.0
        for q in range(n):
            v -= A[q, i] * R[q, c]
        w[i] = v
        for q in range(n):
            v = 0.0
            for r in range(n):
                v += A[r, i] * A[r, q]
            B[i, q] = v + (mu * size if i == q else 0.0)
    if not _nt_lu_solve(B, w, n):
        CODE[c] = C_SINGULAR
        return
    _nt_store(w, n, c, S, D)


@noref
def _nt_store(w, n, c, S, D):
    total = 0.0
    for i in range(n):
        D[i, c] = w[i]
        total += w[i] * w[i]
    S[NS_TRIED, c] = math.sqrt(total)


@noref
@numpy_version(_nt_directions_numpy)
def _nt_directions(OUT, R, IDX, a, n, k, S, D, CODE, A, B, w):
    """``_nt_direction`` for each start IDX[j], its DG in column j of the kernel's output."""
    for j in range(a):
        _nt_direction(OUT, j, IDX[j], n, k, R, S, D, CODE, A, B, w)


def _nt_by_start_numpy():
    return False


@noref
@numpy_version(_nt_by_start_numpy)
def _nt_by_start():
    """Whether the Jacobians are made start by start (compiled: the kernel's tangent rows of one start
    lie together in memory, where a block's columns would be read n (n + 1) numbers apart) or for the
    whole block at once (plain Python: one numpy call for all)."""
    return True


def _nt_accept_numpy(RN, NN, XN, IDX, s, n, S, X, R, CODE, min_damping, xtol, slow, bound):
    c = IDX[:s]
    better = NN[:s] < S[NS_NORM, c]
    took = c[better]
    X[:, took] = XN[:, :s][:, better]
    R[:, took] = RN[:, :s][:, better]
    S[NS_NORM, took] = NN[:s][better]
    lam, mu = S[NS_LAM, took], S[NS_MU, took]
    step = lam * S[NS_TRIED, took]
    S[NS_STEP, took] = step
    S[NS_ITER, took] += 1.0
    full = (lam == 1.0) & (mu == 0.0)
    S[NS_SLOW, took] = np.where(full & (step > 0.95 * S[NS_LAST, took]), S[NS_SLOW, took] + 1.0, 0.0)
    S[NS_LAST, took] = np.where(full, step, math.inf)
    S[NS_MU, took] = np.where(mu >= 10.0 * MARQUARDT, 0.1 * mu, 0.0)
    x = X[:, took]
    size = np.maximum(1.0, np.sqrt(np.sum(x * x, axis=0)))
    exact = S[NS_NORM, took] == 0.0
    done = exact | (step <= xtol * size)
    far = np.max(np.abs(x), axis=0, initial=0.0) > bound
    CODE[took[done]] = C_OK
    S[NS_STEP, took[exact]] = 0.0
    CODE[took[~done & far]] = C_DIVERGED
    CODE[took[~done & ~far & (slow > 0) & (S[NS_SLOW, took] >= slow)]] = C_STALLED
    missed = c[~better]
    x = X[:, missed]
    size = np.maximum(1.0, np.sqrt(np.sum(x * x, axis=0)))
    newton = (S[NS_MU, missed] == 0.0) & (S[NS_REG, missed] == 0.0) & (S[NS_LAM, missed] == 1.0)
    rounding = newton & (S[NS_TRIED, missed] <= xtol * size)
    CODE[missed[rounding]] = C_OK
    S[NS_STEP, missed[rounding]] = np.minimum(S[NS_STEP, missed[rounding]], S[NS_TRIED, missed[rounding]])
    missed, size = missed[~rounding], size[~rounding]
    marquardt = S[NS_MU, missed] > 0.0
    S[NS_MU, missed[marquardt]] *= 10.0
    S[NS_LAM, missed[~marquardt]] *= 0.5
    damped = ~marquardt & (S[NS_LAM, missed] < min_damping)
    near = damped & ((S[NS_TRIED, missed] <= NEAR * size) | (S[NS_TURNS, missed] >= TURNS))
    S[NS_MU, missed[damped & ~near]] = MARQUARDT
    S[NS_TURNS, missed[damped & ~near]] += 1.0
    ended = missed[near | (marquardt & (S[NS_MU, missed] > MARQUARDT_MAX))]
    CODE[ended] = np.where(S[NS_REG, ended] != 0.0, C_SINGULAR, C_STALLED)
    S[NS_STEP, ended] = np.minimum(S[NS_STEP, ended], S[NS_TRIED, ended])
    going = missed[~marquardt & ~damped]
    IDX[:going.size] = going
    return going.size


@noref
@numpy_version(_nt_accept_numpy)
def _nt_accept(RN, NN, XN, IDX, s, n, S, X, R, CODE, min_damping, xtol, slow, bound):
    """Each start IDX[j] takes its trial (XN[:, j], G = RN[:, j], |G| = NN[j]) when it lowers |G|,
    and ends (its code) when converged, out of the box or slow. A Newton trial that does not halves
    the damping; below ``min_damping`` the start turns to Levenberg-Marquardt steps (S[NS_MU] =
    MARQUARDT; it ends instead when the full step was within NEAR of the point, the rounding level,
    or when it has turned TURNS times already). A
    Marquardt trial that does not multiplies mu by 10, ending the start above MARQUARDT_MAX; one that
    does divides it by 10, back to Newton below MARQUARDT. The starts still searching at this point
    are listed in IDX; returns their number (a start given a new mu waits for the next iteration)."""
    going = 0
    for j in range(s):
        c = IDX[j]
        size = 0.0
        if NN[j] < S[NS_NORM, c]:
            big = 0.0
            for i in range(n):
                v = XN[i, j]
                X[i, c] = v
                R[i, c] = RN[i, j]
                size += v * v
                big = max(big, abs(v))
            size = max(1.0, math.sqrt(size))
            S[NS_NORM, c] = NN[j]
            lam, mu = S[NS_LAM, c], S[NS_MU, c]
            step = lam * S[NS_TRIED, c]
            S[NS_STEP, c] = step
            S[NS_ITER, c] += 1.0
            if lam == 1.0 and mu == 0.0:
                S[NS_SLOW, c] = S[NS_SLOW, c] + 1.0 if step > 0.95 * S[NS_LAST, c] else 0.0
                S[NS_LAST, c] = step
            else:
                S[NS_SLOW, c] = 0.0
                S[NS_LAST, c] = math.inf
            S[NS_MU, c] = 0.1 * mu if mu >= 10.0 * MARQUARDT else 0.0
            if S[NS_NORM, c] == 0.0:
                CODE[c] = C_OK
                S[NS_STEP, c] = 0.0  # an exact root: no uncertainty left
            elif step <= xtol * size:
                CODE[c] = C_OK
            elif big > bound:
                CODE[c] = C_DIVERGED
            elif slow > 0 and S[NS_SLOW, c] >= slow:
                CODE[c] = C_STALLED
            continue
        for i in range(n):
            size += X[i, c] * X[i, c]
        size = max(1.0, math.sqrt(size))
        if S[NS_MU, c] > 0.0:
            S[NS_MU, c] *= 10.0
            if S[NS_MU, c] > MARQUARDT_MAX:
                _nt_end(c, S, CODE)
            continue
        if S[NS_LAM, c] == 1.0 and S[NS_REG, c] == 0.0 and S[NS_TRIED, c] <= xtol * size:
            CODE[c] = C_OK  # the full step is at the rounding level and lowers |G| no more
            S[NS_STEP, c] = min(S[NS_STEP, c], S[NS_TRIED, c])
            continue
        S[NS_LAM, c] *= 0.5
        if S[NS_LAM, c] < min_damping:
            if S[NS_TRIED, c] <= NEAR * size or S[NS_TURNS, c] >= TURNS:
                _nt_end(c, S, CODE)
            else:
                S[NS_MU, c] = MARQUARDT
                S[NS_TURNS, c] += 1.0
            continue
        IDX[going] = c
        going += 1
    return going


@noref
def _nt_end(c, S, CODE):
    """Start c ends where no step lowers |G|: singular when its last Newton matrix was, else stalled."""
    CODE[c] = C_SINGULAR if S[NS_REG, c] != 0.0 else C_STALLED
    S[NS_STEP, c] = min(S[NS_STEP, c], S[NS_TRIED, c])


def _nt_start_numpy(NN, X, count, ftol, frel, S, CODE):
    S[:, :count] = 0.0
    S[NS_NORM, :count] = NN[:count]
    S[NS_STEP, :count] = math.inf
    S[NS_TRIED, :count] = math.inf
    S[NS_LAST, :count] = math.inf
    CODE[:count] = np.where(np.isfinite(NN[:count]), RUNNING, C_UNDEFINED)
    _nt_converged_numpy(X, count, ftol, frel, S, CODE)


@noref
@numpy_version(_nt_start_numpy)
def _nt_start(NN, X, count, ftol, frel, S, CODE):
    """Each start's numbers from |G| there (NN); C_UNDEFINED where G is not finite there."""
    for c in range(count):
        for r in range(NS_ROWS):
            S[r, c] = 0.0
        S[NS_NORM, c] = NN[c]
        S[NS_STEP, c] = math.inf
        S[NS_TRIED, c] = math.inf
        S[NS_LAST, c] = math.inf
        CODE[c] = RUNNING if math.isfinite(NN[c]) else C_UNDEFINED
    _nt_converged(X, count, ftol, frel, S, CODE)


def _nt_converged_numpy(X, count, ftol, frel, S, CODE):
    big = np.maximum(1.0, np.max(np.abs(X[:, :count]), axis=0, initial=0.0))
    met = (CODE[:count] == RUNNING) & (S[NS_NORM, :count] <= ftol + frel * big)
    CODE[:count][met] = C_OK
    S[NS_STEP, :count][met & (S[NS_NORM, :count] == 0.0)] = 0.0


@noref
@numpy_version(_nt_converged_numpy)
def _nt_converged(X, count, ftol, frel, S, CODE):
    """Starts whose |G| is within ftol + frel max(1, |x|_inf) end converged (an exact root: step 0)."""
    for c in range(count):
        if CODE[c] != RUNNING:
            continue
        big = 1.0
        for i in range(X.shape[0]):
            big = max(big, abs(X[i, c]))
        if S[NS_NORM, c] <= ftol + frel * big:
            CODE[c] = C_OK
            if S[NS_NORM, c] == 0.0:
                S[NS_STEP, c] = 0.0


# ---------------------------------------------------------------- the loop
@inner
def _nt_evaluate(g, which, k, n, Z, Pb, T, OUT, s):
    """The kernel on the first s columns of Z: f (which = 0) or f with DG's tangent vectors (which =
    n); for a map k times, each iterate fed back in."""
    g(which, T, Z, Pb, OUT, s)
    for _ in range(1, k):
        _nt_copy_rows(OUT, Z, n * (which + 1), s)
        g(which, T, Z, Pb, OUT, s)


@loop
def newton_block(g, k, X, Pb, count, max_iter, ftol, frel, xtol, slow, bound, min_damping, S, CODE, Z, OUT, Z1,
                 OUT1, R, RN, XN, D, NN, T, IDX, A, B, w):
    """Damped Newton from each of the first ``count`` columns of X (n x block, in place: the end
    points), G = f (k = 0) or f^k(x) - x (a map, k >= 1), on the batched kernel ``g`` with the
    parameter columns Pb. Ends with each start's code in CODE and its numbers in S (rows S_...):
    |G|, the last step's size (the smaller of it and the full step tried when the start ended with
    no trial lowering |G|), iterations. Z, OUT (n x block; n(n+1) x block for plain Python, where the
    block's Jacobians are made together), Z1, OUT1 (n(n+1) x 1), R, RN, XN, D (n x block), NN, T
    (block), IDX (block, integers), A, B (n x n), w (n) are work arrays."""
    n = X.shape[0]
    zero, one = np.int64(0), np.int64(1)  # not literals: a helper called with a literal 0 or 1 in one place and
    # a variable in another is compiled twice (tests/core/test_loop_signatures.py)
    _nt_all(IDX, count)
    _nt_gather(X, IDX, count, Z, n)
    _nt_evaluate(g, zero, k, n, Z, Pb, T, OUT, count)
    _nt_residuals(OUT, X, k, n, count, R, NN)
    _nt_start(NN, X, count, ftol, frel, S, CODE)
    for _ in range(max_iter):
        a = _nt_active(CODE, IDX, count)
        if a == 0:
            return 0
        if _nt_by_start():
            for j in range(a):
                c = IDX[j]
                for i in range(n):
                    Z1[i, 0] = X[i, c]
                _nt_identity(Z1, n, one)
                _nt_evaluate(g, n, k, n, Z1, Pb, T, OUT1, one)
                _nt_direction(OUT1, zero, c, n, k, R, S, D, CODE, A, B, w)
        else:
            _nt_gather(X, IDX, a, Z, n)
            _nt_identity(Z, n, a)
            _nt_evaluate(g, n, k, n, Z, Pb, T, OUT, a)
            _nt_directions(OUT, R, IDX, a, n, k, S, D, CODE, A, B, w)
        s = _nt_active(CODE, IDX, count)
        while s > 0:
            _nt_trial(X, D, S, IDX, s, Z, XN, n)
            _nt_evaluate(g, zero, k, n, Z, Pb, T, OUT, s)
            _nt_residuals(OUT, XN, k, n, s, RN, NN)
            s = _nt_accept(RN, NN, XN, IDX, s, n, S, X, R, CODE, min_damping, xtol, slow, bound)
        _nt_converged(X, count, ftol, frel, S, CODE)
    a = _nt_active(CODE, IDX, count)
    for j in range(a):
        CODE[IDX[j]] = C_STALLED  # the iterations ran out
    return 0


def _nt_all_numpy(IDX, count):
    IDX[:count] = np.arange(count)


@noref
@numpy_version(_nt_all_numpy)
def _nt_all(IDX, count):
    """IDX lists every start."""
    for c in range(count):
        IDX[c] = c


# ---------------------------------------------------------------- the Python side
@dataclass
class NewtonStarts:
    """The ends of ``newton_starts``: one row (or entry) per start."""

    x: np.ndarray  # (starts, n) the end points
    norm: np.ndarray  # |G| there
    step: np.ndarray  # the last step's size (the smaller of it and the full step tried, for a start that stalled)
    iterations: np.ndarray
    codes: np.ndarray  # engine/status.py codes: C_OK (converged), C_DIVERGED, C_UNDEFINED, C_SINGULAR, C_STALLED;
    #                    RUNNING (-1) for starts never run (``enough`` stopped the search first)

    def counts(self) -> dict[str, int]:
        """How many starts ended in each status, in words (engine/status.py), the ones never run left out."""
        codes, found = self.codes[self.codes >= 0], {}
        for code in np.unique(codes):
            found[WORD[int(code)]] = int(np.sum(codes == code))
        return found


BLOCK_ENTRIES = 1 << 20  # the kernel's block holds at most this many numbers (n (n + 1) per start)


def newton_starts(system, starts, p, *, iterate: int = 0, max_iter: int = 60, ftol: float = 0.0,
                  frel: float = 0.0, xtol: float = 1e-15, slow: int = 5, bound: float = 1e12,
                  min_damping: float = 1 / 64, report=None, enough: Callable | None = None,
                  engine=None) -> NewtonStarts:
    """Damped Newton from every row of ``starts`` (m x n) on G = f (``iterate`` = 0: a flow's
    equilibria) or G = f^k(x) - x (``iterate`` = k >= 1: a map's fixed points and cycles), all in the
    compiled loop ``engine/newton_starts.newton_block`` (plain Python: the same loop with numpy over
    the starts), block by block; the stopping rules are described there. ``report(fraction)`` between
    blocks (it raises Cancelled to stop); ``enough(result)`` after each block: True leaves the
    remaining starts unrun. ``engine``: default the compiled one when it is ready, else plain Python."""
    from orbitdesk.engine import compiled

    starts = np.atleast_2d(np.asarray(starts, dtype=float))
    m, n = starts.shape
    k = int(iterate)
    if engine is None:  # the compiled loop when ready; never waits for the compiler: the numpy path is vectorised
        engine = compiled.engine_for(system)  # over the starts (200 starts at 200 states: 4.6 s, less than a compile)
    result = NewtonStarts(starts.copy(), np.full(m, math.inf), np.full(m, math.inf), np.zeros(m, dtype=np.int64),
                          np.full(m, RUNNING, dtype=np.int64))
    if m == 0 or n == 0:
        return result
    rows = n * (n + 1)  # a start's state and its n tangent vectors
    # compiled, the Jacobians are made start by start (newton_starts._nt_by_start): the block holds states only
    block_rows = n if engine.compiled else rows
    block = int(max(1, min(m, 256, max(8, BLOCK_ENTRIES // block_rows))))
    p = np.asarray(p, dtype=float).reshape(-1)
    Pb = np.ascontiguousarray(np.repeat((p if p.size else np.zeros(1))[:, None], block, axis=1))
    work = (np.zeros((NS_ROWS, block)), np.zeros(block, dtype=np.int64), np.zeros((block_rows, block)),
            np.zeros((block_rows, block)), np.zeros((rows, 1)), np.zeros((rows, 1)), np.zeros((n, block)),
            np.zeros((n, block)), np.zeros((n, block)), np.zeros((n, block)), np.zeros(block), np.zeros(block), np.zeros(block, dtype=np.int64),
            np.zeros((n, n)), np.zeros((n, n)), np.zeros(n))
    S, CODE = work[0], work[1]
    run = engine.entry("newton_block")
    X = np.zeros((n, block))
    for first in range(0, m, block):
        if report is not None:
            report(first / m)
        count = min(block, m - first)
        X[:, :count] = starts[first:first + count].T
        with np.errstate(all="ignore"):
            run(engine.batch, k, X, Pb, count, int(max_iter), float(ftol), float(frel), float(xtol), int(slow),
                float(bound), float(min_damping), *work)
        part = slice(first, first + count)
        result.x[part] = X[:, :count].T
        result.norm[part] = S[NS_NORM, :count]
        result.step[part] = S[NS_STEP, :count]
        result.iterations[part] = S[NS_ITER, :count].astype(np.int64)
        result.codes[part] = CODE[:count]
        if enough is not None and enough(result):
            break
    if report is not None:
        report(1.0)
    return result


__all__ = ["NewtonStarts", "newton_starts", "newton_block", "solve_stack", "solve_each", "RUNNING"]
