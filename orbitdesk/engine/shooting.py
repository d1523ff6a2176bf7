"""Multi-start shooting: damped Newton on the periodic-orbit equations of a flow from many starts at
once, every run of every start of an iteration in one call of the member loop, with a status per start.

Forced flows (``sections`` None): the unknowns are u, the period T of each start is fixed (a whole
number of forcing periods) and G(u) = phi_T(u) - u, DG = M - I with M the monodromy matrix.
Autonomous flows: the unknowns are (u, T) and G(u, T) = (phi_T(u) - u, a . (u - b)), the phase
condition putting u on the hyperplane through b normal to a; DG is the bordered matrix

    | M - I   f(phi_T(u)) |
    | a^T     0           |

Each iteration runs the state with its n tangent vectors (the variational equations, started as
the identity) from every start still iterating that has no DG at its point yet: one call of
``flow_ends`` (``drivers.members_run``: every start a member, each to its own end time, the
monodromy read off the dense output at that time; below MEMBERS_FROM starts one ``flow_run`` each,
which costs less there); solves every start's Newton system (``newton_starts.solve_each``: the
multi-start Newton's own LU, compiled; or numpy's stacked solve); then tries x + lam dx, lam = 1,
1/2, ... down to ``min_damping``, the trials of every start together, taking the first trial that
lowers |G| (analyses/newton.damped_newton's rules, start by start). Up to TANGENT_TRIALS states the
full step of a start whose last step was full (Newton converging) is tried with the tangent vectors,
so when it is taken its DG comes along: one run per Newton step instead of two; damped trials run
without them (a start still searching rejects many). Statuses
(engine/status.py), as ``newton_starts`` gives them:

* ``C_OK``: |G_u| = |phi_T(u) - u| within the caller's ``goal`` before an iteration;
* ``C_UNDEFINED``: the run from the start, or the tangent run from an accepted point, failed;
* ``C_DIVERGED``: the iterate left the box |x|_inf <= ``bound``;
* ``C_SINGULAR``: DG is singular (a family of orbits, a non-hyperbolic orbit);
* ``C_STALLED``: no trial lowered |G|, or the iterations ran out.

``RUNNING`` (-1) marks starts that ``enough`` left unfinished. The runs come from a callable
``flow(U, T, tangents)``, so a stiff method (scipy's steppers, start by start) is served by the same
iteration; ``flow_ends`` is the explicit methods' one, on compiled members or, in plain Python, on
members_numpy's blocks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from orbitdesk.engine.newton_starts import RUNNING, solve_stack
from orbitdesk.engine.progress import Cancelled
from orbitdesk.engine.status import C_CANCELLED, C_DIVERGED, C_OK, C_SINGULAR, C_STALLED, C_UNDEFINED, WORD


TANGENT_TRIALS = 4  # states up to which trials carry the tangent vectors: one run per Newton step, not two
OWN_LU_FROM = 32  # unknowns from which the Newton systems go through solve_each (below, numpy is quick there)
MEMBERS_FROM = 8  # starts from which one member-loop call beats a run for each (benchmarks/bench_cycles.py)


def flow_ends(engine, name, U, T, p, rtol, atol, tangents, t0=0.0, report=None):
    """phi from t0 to t0 + T[j] of each row U[j] (m x n), with (``tangents``) the monodromy matrices too:
    from MEMBERS_FROM starts on all in one call of the member loop (each member to its own end time, read
    off its dense output there), fewer one single run each (there the member loop's block costs more
    than it saves). Returns (ends (m, n), M (m, n, n) or None, ok (m,)): ok False where the run failed
    (a blow-up, an undefined value) or a value is not finite. Raises Cancelled when ``report`` does."""
    from orbitdesk.engine import drivers

    U = np.atleast_2d(np.asarray(U, dtype=float))
    m, n = U.shape
    ends_t = t0 + np.asarray(T, dtype=float).reshape(m)
    width = n * (n + 1) if tangents else n
    with np.errstate(all="ignore"):
        if m >= MEMBERS_FROM:
            grid = np.unique(ends_t)  # each start's end time is a sample time (read at the step that ends there)
            where = np.searchsorted(grid, ends_t)
            out = drivers.members_run(engine, name, float(t0), ends_t, np.array(U.T), p, rtol, atol, grid=grid,
                                      tangents=n if tangents else 0, interval=math.inf, report=report,
                                      tangent_samples=True)  # (U copied: the loop writes its ends over it)
            rows = out.samples[:, np.arange(m), where].T  # (m, n(n + 1)) or (m, n)
            reached = out.t == ends_t
        else:
            rows, reached = np.full((m, width), np.nan), np.zeros(m, dtype=bool)
            for j in range(m):
                z0 = np.concatenate([U[j], np.eye(n).ravel()]) if tangents else U[j].copy()
                out = drivers.flow_run(engine, name, float(t0), float(ends_t[j]), z0, p, rtol, atol,
                                       grid=[float(ends_t[j])], which=n if tangents else 0, report=report)
                if out.code == C_CANCELLED:
                    raise Cancelled("cancelled")
                if out.code == 0 and out.time.size == 1:
                    rows[j], reached[j] = out.states[:, -1], True
    ok = np.all(np.isfinite(rows), axis=1) & reached
    ends = rows[:, :n].copy()
    M = rows[:, n:].reshape(m, n, n).copy() if tangents else None
    return ends, M, ok


@dataclass
class ShootingStarts:
    """The ends of ``shooting_starts``: one row (or entry) per start."""

    x: np.ndarray  # (m, n + 1) the end points (u, T) of autonomous shooting, (m, n) of forced shooting
    residual: np.ndarray  # (m, n + 1) or (m, n): G there
    gap: np.ndarray  # (m,) |phi_T(u) - u| there (inf where it was never a number)
    iterations: np.ndarray  # (m,) the iteration each start ended in
    codes: np.ndarray  # engine/status.py codes; RUNNING for starts left unfinished
    monodromy: np.ndarray  # (m, n, n) M at the end point where it was made there, else NaN
    rate: np.ndarray = field(default=None)  # (m, n) f at phi_T(u) where the monodromy was made (autonomous)

    def counts(self) -> dict[str, int]:
        """How many starts ended in each status, in words (engine/status.py), the unfinished left out."""
        codes, found = self.codes[self.codes >= 0], {}
        for code in np.unique(codes):
            found[WORD[int(code)]] = int(np.sum(codes == code))
        return found


def shooting_starts(flow: Callable, starts, periods, *, goal: Callable, sections=None, rhs: Callable | None = None,
                    max_iter: int = 40, min_damping: float = 1 / 64, bound: float = 1e12, min_period: float = 0.05,
                    enough: Callable | None = None, report: Callable | None = None,
                    tangent_trials: bool | None = None, engine=None) -> ShootingStarts:
    """Damped Newton on the shooting equations from every row of ``starts`` (m x n) at once.

    ``flow(U, T, tangents)`` -> (ends, M or None, ok), as ``flow_ends``. ``periods`` (m,): each start's
    period (fixed for forced shooting, the first guess for autonomous). ``sections`` = (normals,
    points), each (m, n): autonomous shooting with the phase condition, ``rhs(T, U)`` -> f at the
    rows of U (m, n) (the period's column of DG); a trial period below ``min_period`` times the
    current one is not tried. ``goal(idx, X, G)`` -> the largest |phi_T(u) - u| that counts as
    converged for each start idx[j] at X[j] (its G beside it). ``enough(result)`` after every iteration: True
    stops, the starts still iterating left RUNNING. ``report(fraction)`` between iterations (it may
    raise Cancelled). ``tangent_trials``: full steps after a full step are tried with the tangent
    vectors, so a taken one brings DG along (default: up to TANGENT_TRIALS states, where they cost
    little beside the state's).
    ``engine``: its loop ``solve_each`` solves the Newton systems of OWN_LU_FROM unknowns or more
    (compiled: no LAPACK threads; otherwise numpy's stacked solve)."""
    U0 = np.atleast_2d(np.asarray(starts, dtype=float))
    m, n = U0.shape
    autonomous = sections is not None
    T0 = np.broadcast_to(np.asarray(periods, dtype=float), (m,)).copy()
    X = np.hstack([U0, T0[:, None]]) if autonomous else U0.copy()
    size = X.shape[1]
    if autonomous:
        normals, points = (np.atleast_2d(np.asarray(v, dtype=float)) for v in sections)
        normals, points = np.broadcast_to(normals, (m, n)), np.broadcast_to(points, (m, n))
    result = ShootingStarts(X, np.full((m, size), np.nan), np.full(m, math.inf), np.zeros(m, dtype=np.int64),
                            np.full(m, RUNNING, dtype=np.int64), np.full((m, n, n), np.nan),
                            np.full((m, n), np.nan))
    if m == 0:
        return result
    have = np.zeros(m, dtype=bool)  # DG known at the current point
    if tangent_trials is None:
        tangent_trials = n <= TANGENT_TRIALS
    trial_M, trial_rate = np.full((m, n, n), np.nan), np.full((m, n), np.nan)

    def residuals(Xs, idx, tangents):
        """G at the rows Xs of the starts idx: (G, |G|, |G_u|), inf where a run failed; with
        ``tangents`` the monodromy there too (and f at the end), kept when the point is."""
        Ts = Xs[:, n] if autonomous else T0[idx]
        ends, M, ok = flow(Xs[:, :n], Ts, tangents)
        if tangents:
            trial_M[idx], trial_rate[idx] = np.nan, np.nan
            trial_M[idx[ok]] = M[ok]
            if autonomous:
                trial_rate[idx[ok]] = rhs(Ts[ok], ends[ok])
        G = np.full((len(idx), size), np.nan)
        G[:, :n] = ends - Xs[:, :n]
        if autonomous:
            G[:, n] = np.einsum("ij,ij->i", normals[idx], Xs[:, :n] - points[idx])
        with np.errstate(all="ignore"):
            norm = np.where(ok, np.sqrt(np.sum(G * G, axis=1)), math.inf)
            gap = np.where(ok, np.sqrt(np.sum(G[:, :n] ** 2, axis=1)), math.inf)
        norm[~np.isfinite(norm)] = math.inf
        return G, norm, gap

    everyone = np.arange(m)
    G, norm, gap = residuals(X, everyone, tangent_trials)
    full = np.ones(m, dtype=bool)  # the start's last step was a full Newton step (or it has taken none)
    result.residual[:], result.gap[:] = G, gap
    result.codes[~np.isfinite(norm)] = C_UNDEFINED
    if tangent_trials:
        result.monodromy[:], result.rate[:] = trial_M, trial_rate
        trial_M[:], trial_rate[:] = np.nan, np.nan
        have[:] = np.all(np.isfinite(trial_M), axis=(1, 2))
    for it in range(1, max_iter + 1):
        live = np.flatnonzero(result.codes == RUNNING)
        result.iterations[live] = it
        if live.size:
            met = result.gap[live] <= goal(live, X[live], result.residual[live])
            result.codes[live[met]] = C_OK
            live = live[~met]
        if live.size == 0 or (enough is not None and enough(result)):
            break
        if report is not None:
            report(it / max_iter)
        # DG at every live point that has none: one run with tangent vectors for all of them
        need = live[~have[live]]
        if need.size:
            Ts = X[need, n] if autonomous else T0[need]
            ends, M, ok = flow(X[need, :n], Ts, True)
            result.codes[need[~ok]] = C_UNDEFINED
            result.monodromy[need[ok]] = M[ok]
            if autonomous:
                result.rate[need[ok]] = rhs(Ts[ok], ends[ok])
            have[need[ok]] = True
            live = live[result.codes[live] == RUNNING]
        if live.size == 0:
            continue
        A = np.zeros((live.size, size, size))
        A[:, :n, :n] = result.monodromy[live] - np.eye(n)
        if autonomous:
            A[:, :n, n] = result.rate[live]
            A[:, n, :n] = normals[live]
        with np.errstate(all="ignore"):
            if engine is None or size < OWN_LU_FROM:
                steps = solve_stack(A, -result.residual[live])
            else:
                steps = np.ascontiguousarray(-result.residual[live])
                engine.entry("solve_each")(A, steps, int(live.size))
        good = np.all(np.isfinite(A), axis=(1, 2)) & np.all(np.isfinite(steps), axis=1)
        result.codes[live[~good]] = C_SINGULAR
        live, steps = live[good], steps[good]
        lam = np.ones(live.size)
        while live.size:  # the trials of every start still looking, together
            trial = X[live] + lam[:, None] * steps
            allowed = trial[:, n] > min_period * X[live, n] if autonomous else np.ones(live.size, dtype=bool)
            G_new = np.full((live.size, size), np.nan)
            norm_new, gap_new = np.full(live.size, math.inf), np.full(live.size, math.inf)
            # a full step from a start whose last step was full carries the tangent vectors (with
            # tangent_trials): Newton converging; the damped trials of a start still searching do not
            for tangents in (True, False):
                part = allowed & (((lam == 1.0) & full[live] & tangent_trials) == tangents)
                if np.any(part):
                    G_new[part], norm_new[part], gap_new[part] = residuals(trial[part], live[part], tangents)
            better = norm_new < norm[live]
            took = live[better]
            X[took], norm[took] = trial[better], norm_new[better]
            result.residual[took], result.gap[took] = G_new[better], gap_new[better]
            full[took] = lam[better] == 1.0
            # made again at the new point when needed (or the trial's, when it carried the tangent vectors)
            result.monodromy[took], result.rate[took] = trial_M[took], trial_rate[took]
            have[took] = np.all(np.isfinite(trial_M[took]), axis=(1, 2))
            trial_M[live], trial_rate[live] = np.nan, np.nan
            far = took[np.max(np.abs(X[took, :n]), axis=1) > bound]
            result.codes[far] = C_DIVERGED
            lam = lam[~better] * 0.5
            live, steps = live[~better], steps[~better]
            result.codes[live[lam < min_damping]] = C_STALLED
            keep = lam >= min_damping
            live, steps, lam = live[keep], steps[keep], lam[keep]
    else:  # the iterations ran out: the last step's point judged once more
        live = np.flatnonzero(result.codes == RUNNING)
        met = result.gap[live] <= goal(live, X[live], result.residual[live]) if live.size else np.zeros(0, dtype=bool)
        result.codes[live[met]] = C_OK
        result.codes[live[~met]] = C_STALLED
    result.x = X
    return result


__all__ = ["ShootingStarts", "shooting_starts", "flow_ends"]
