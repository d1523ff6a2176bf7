"""Branches of limit cycles of autonomous flows, started from a Hopf point or from a found cycle.

Method: single shooting on the compiled system's flow. Unknowns x = (u0, T, p):

    phi_T(u0; p) - u0 = 0,     (u0 - u_ref) . f(u_ref) = 0

(the phase condition puts u0 on the hyperplane through the previous point of the branch, normal to
the flow there). The Jacobian is exact: the monodromy matrix M and the parameter sensitivity
d phi / d p are integrated alongside the orbit, and d phi / d T = f(phi_T). Shooting was chosen
because it reuses the tested integrator and gives the Floquet multipliers (eigenvalues of M) with
no extra work; the cycles our users continue are low-dimensional and moderately stable or unstable.
Strongly unstable cycles (multipliers beyond about 1e8) defeat single shooting: the corrector then
fails and the branch ends with that reason in words. Collocation would be the choice for those.

Test functions on the nontrivial multipliers (the trivial one, nearest 1, is left out):
cycle fold (the parameter component of the tangent), period doubling (prod (mu + 1)), torus
(prod_{i<j} (mu_i mu_j - 1), real pairs rejected when located).

Branch switching at a period doubling: the cycle of twice the period is born there. At the point
(u0, T, p) the monodromy matrix has the multiplier -1 with eigenvector v; the doubled cycle passes
through u0 + eps v with period near 2T, so the doubled problem is corrected from (u0 + eps v, 2T, p)
on the hyperplane v . (u - u0) = eps and continued away from the parent (the other way it only
returns to the parent cycle run through twice). Doubled branches switch again at their own period
doublings, up to ``MAX_DOUBLINGS`` levels (the start of a cascade: Feigenbaum 1978).
"""

from __future__ import annotations

import math

import numpy as np

from orbitdesk.analyses.conservative import flow_reason, structure
from orbitdesk.analyses.cycles import CycleError, find_cycle
from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.analyses.continuation.arclength import SpecialPoint, StepSettings, continue_curve, newton_bordered, null_tangent
from orbitdesk.analyses.continuation.branches import check_interval, default_settings, to_special
from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions, extreme
from orbitdesk.analyses.continuation.points import map_stability, pair_product
from orbitdesk.analyses.continuation.results import CYCLE, CYCLE_FOLD, HOPF, PERIOD_DOUBLING, TORUS, Branch, BranchSet

SAMPLES = 200  # points per orbit for the maxima and minima
SHRUNK = 2e-3  # a cycle smaller than this (relative to the state's size) has shrunk to an equilibrium
MAX_DOUBLINGS = 3  # levels of period doubling followed by switching (periods 2T, 4T, 8T)


class CycleProblem:
    tolerance = 1e-8  # the residual is integrated to rtol 1e-10; near a Hopf point the system is ill-conditioned

    def __init__(self, funcs: ModelFunctions, p_vector, k: int, u_ref, max_period: float):
        self.funcs, self.n, self.k = funcs, funcs.n, k
        self.p_vector = np.array(p_vector, dtype=float)
        self.size = self.n + 2
        self.max_period = max_period
        self._cache = (None, None)
        self.set_reference(np.asarray(u_ref, float), self.p_vector)

    def params(self, x):
        pv = self.p_vector.copy()
        pv[self.k] = x[-1]
        return pv

    def set_reference(self, u, pv):
        normal = self.funcs.f(u, pv)
        self.u_ref, self.f_ref = u.copy(), normal / max(float(np.linalg.norm(normal)), 1e-300)

    def where(self, x):
        return f"{self.funcs.system.parameters[self.k]} = {x[-1]:.8g} (period {x[-2]:.6g})"

    def _flow(self, x):
        key = x.tobytes()
        if self._cache[0] != key:
            if not (0 < x[-2] <= 2 * self.max_period):
                raise ContinuationError("the period left its range")
            pv = self.params(x)
            end, M, w = self.funcs.flow(x[:self.n], pv, 0.0, float(x[-2]), self.k)
            self._cache = (key, (end, M, w, self.funcs.f(end, pv)))
        return self._cache[1]

    def residual(self, x):
        end = self._flow(x)[0]
        return np.concatenate([end - x[:self.n], [float((x[:self.n] - self.u_ref) @ self.f_ref)]])

    def jacobian(self, x):
        _, M, w, f_end = self._flow(x)
        top = np.column_stack([M - np.eye(self.n), f_end, w])
        return np.vstack([top, np.concatenate([self.f_ref, [0.0, 0.0]])])

    def accept(self, x):
        self.set_reference(x[:self.n], self.params(x))

    def multipliers(self, x):
        values = np.linalg.eigvals(self._flow(x)[1]).astype(complex)
        values = values[np.lexsort((-values.imag, -np.abs(values)))]
        trivial = int(np.argmin(np.abs(values - 1.0)))
        return values, np.delete(values, trivial)

    def quick_describe(self, x):
        values, nontrivial = self.multipliers(x)
        return {"spectrum": values, "nontrivial": nontrivial, "stable": map_stability(nontrivial)}

    def describe(self, x):
        data = self.quick_describe(x)
        _, orbit = self.funcs.orbit(x[:self.n], self.params(x), 0.0, float(x[-2]), SAMPLES)
        data["max"] = np.array([extreme(row, max) for row in orbit])
        data["min"] = np.array([extreme(row, min) for row in orbit])
        self._size = float(np.max(data["max"] - data["min"]))
        return data

    def shrunk(self, x) -> bool:
        """Whether the last described cycle is so small that it is an equilibrium (the end at a Hopf point)."""
        return getattr(self, "_size", 1.0) < SHRUNK * max(1.0, float(np.max(np.abs(x[:self.n]))))

    def tests(self, x, tangent, data, only=None):
        out = {}
        values = data["nontrivial"]
        if only in (None, CYCLE_FOLD):
            out[CYCLE_FOLD] = float(tangent[-1])
        if only in (None, PERIOD_DOUBLING):
            out[PERIOD_DOUBLING] = float(np.prod(values + 1.0).real)
        if only in (None, TORUS) and len(values) >= 2:
            out[TORUS] = pair_product(values, lambda a, b: a * b - 1.0)
        return out

    def special(self, name, x, tangent, data):
        if name == CYCLE_FOLD and self.shrunk(x):
            return None  # the branch turns back through a Hopf point, where the cycle is a point
        info = {"period": float(x[-2])}
        if name == TORUS:
            pair = [v for v in data["nontrivial"] if v.imag > 1e-8 and abs(abs(v) - 1) < 1e-5]
            if not pair:
                return None
            info["frequency"] = float(np.angle(pair[0]))
        return SpecialPoint(name, x, info, tangent=tangent)

    def out_of_bounds(self, x):
        if self.shrunk(x):
            return (f"the cycle shrank to an equilibrium at {self.funcs.system.parameters[self.k]} = {x[-1]:.6g} "
                    "(a Hopf point)")
        if x[-2] > self.max_period:
            return (f"the period grew beyond {self.max_period:.6g}, the longest this continuation follows (a "
                    "period growing without bound is the sign of a homoclinic orbit or a saddle-node on the cycle)")
        return None


def cycle_branches(system: CompiledSystem, param: str, lo: float, hi: float, p=None, guess=None, initial=None,
                   hopf=None, settings: StepSettings | None = None, max_period_factor: float = 30.0,
                   switch: bool = True, cancel: CancelToken | None = None, progress=None) -> BranchSet:
    """The branch of the cycle found near ``guess`` (or born at the Hopf point ``hopf``, a Special), and
    with ``switch`` the branches of doubled period born at its period doublings."""
    system.refuse_delays("continuation of cycles")
    lo, hi = check_interval(system, param, lo, hi)
    if system.kind == MAP or not system.autonomous:
        raise ValueError("cycle branches are for autonomous flows; a forced flow's periodic response is "
                         "continued by the response command, a map's cycles as fixed points of its K-th iterate")
    report = Reporter(progress, cancel)
    funcs = ModelFunctions(system)
    k = funcs.param_index(param)
    pv = (system.param_values if p is None else np.asarray(p, dtype=float)).astype(float).copy()
    if structure(system, pv, free=(param,)) == "flow":
        raise ContinuationError(f"{flow_reason(system, pv, (param,))} at every value of {param}: its cycles come "
                                "in families, one through each point near a centre, not one isolated cycle that "
                                f"could be followed as {param} changes; the cycle command (or the limit-cycle "
                                "view) finds the cycle through a chosen point at each value")
    settings = settings or default_settings(lo, hi, 200)
    if hopf is not None:
        x0, tangent, problem = _from_hopf(funcs, pv, k, hopf, settings, max_period_factor)
        both = False
    else:
        x0, tangent, problem = _from_cycle(system, funcs, pv, k, lo, hi, guess, initial, settings,
                                           max_period_factor, cancel)
        both = True
    queue = [(x0, tangent, problem, both, 0)]
    branches, notes = [], []
    while queue:
        x0, tangent, problem, both, level = queue.pop(0)
        share = 0.9 / (1 + level)
        curve = continue_curve(problem, x0, tangent, lo, hi, settings, both=both, cancel=cancel,
                               progress=report.part(0.05 if not branches else 0.95 - share, share))
        branch = _branch(system, funcs, param, curve, level)
        branches.append(branch)
        if not switch or level >= MAX_DOUBLINGS:
            continue
        for special in curve.special:
            if special.type != PERIOD_DOUBLING:
                continue
            try:
                queue.append((*_doubled(funcs, problem, special, settings), False, level + 1))
            except ContinuationError as err:
                notes.append(f"the doubled cycle at {param} = {special.x[-1]:.6g}: {err}")
    report(1.0)
    return BranchSet(param, branches, notes)


def _branch(system, funcs, param, curve, level) -> Branch:
    xs = np.array(curve.xs)
    specials = [to_special(system, s) for s in curve.special]
    if level:  # the first point is next to the period doubling the branch was switched from: no repeat
        specials = [s for s in specials if s.index > 1]
    return Branch(CYCLE, param, list(system.states), xs[:, -1], xs[:, :funcs.n].T,
                  [d["stable"] for d in curve.data], [d["spectrum"] for d in curve.data], specials,
                  list(curve.reasons), periods=xs[:, -2],
                  maxima={s: np.array([d["max"][i] for d in curve.data]) for i, s in enumerate(system.states)},
                  minima={s: np.array([d["min"][i] for d in curve.data]) for i, s in enumerate(system.states)})


def _doubled(funcs, parent: CycleProblem, special, settings):
    """Start (x, tangent, problem) of the cycle of twice the period born at a period doubling."""
    x = np.asarray(special.x, dtype=float)
    n, k = funcs.n, parent.k
    u0, period, value = x[:n], float(x[-2]), float(x[-1])
    pv = parent.params(x)
    values, vectors = np.linalg.eig(parent._flow(x)[1])
    i = int(np.argmin(np.abs(values + 1.0)))
    if abs(values[i] + 1.0) > 1e-2:
        raise ContinuationError("no multiplier near -1 at the located point")
    v = np.real(vectors[:, i])
    f0 = funcs.f(u0, pv)
    f0 = f0 / max(float(np.linalg.norm(f0)), 1e-300)
    v = v - (v @ f0) * f0  # transverse to the flow, so the phase condition holds along it
    if np.linalg.norm(v) < 1e-8:
        raise ContinuationError("the doubling direction is along the flow")
    v = v / np.linalg.norm(v)
    problem = CycleProblem(funcs, pv, k, u0, parent.max_period * 2)
    anchor = np.concatenate([u0, [2 * period, value]])
    e = np.concatenate([v, [0.0, 0.0]])
    eps = 0.005 * max(1.0, float(np.linalg.norm(u0)))
    for _ in range(6):
        x1, _ = newton_bordered(problem, anchor + eps * e, e, settings, anchor=anchor, target=eps)
        if x1 is not None and _truly_doubled(problem, x1):
            problem.accept(x1)
            return x1, (x1 - anchor) / np.linalg.norm(x1 - anchor), problem
        eps *= 0.5
    raise ContinuationError("no cycle of twice the period could be corrected next to the point")


def _truly_doubled(problem: CycleProblem, x) -> bool:
    """Whether the corrected cycle is not the parent run twice: half its period does not close it."""
    half = x.copy()
    half[-2] = 0.5 * x[-2]
    end = problem.funcs.flow(x[:problem.n], problem.params(x), 0.0, float(half[-2]), problem.k)[0]
    return float(np.linalg.norm(end - x[:problem.n])) > 1e-4 * (1.0 + float(np.linalg.norm(x[:problem.n])))


def _from_hopf(funcs, pv, k, hopf, settings, factor):
    x_star = np.asarray(hopf.internal["x"], dtype=float)
    q = np.asarray(hopf.internal["q"], dtype=complex)
    u_star, p_star = x_star[:-1], float(x_star[-1])
    omega = float(hopf.frequency)
    period = 2 * math.pi / omega
    direction = q.real / np.linalg.norm(q.real)
    eps = 0.01 * max(1.0, float(np.linalg.norm(u_star)))
    base = pv.copy()
    base[k] = p_star
    u_ref = u_star + eps * direction
    problem = CycleProblem(funcs, base, k, u_ref, factor * period)
    e = np.concatenate([direction, [0.0, 0.0]])
    start = np.concatenate([u_star, [period, p_star]])
    x1 = None
    for _ in range(6):
        x1, _ = newton_bordered(problem, start + eps * e, e, settings, anchor=start, target=eps)
        if x1 is not None:
            break
        eps *= 0.5
    if x1 is None:
        raise ContinuationError("no small cycle could be found next to the Hopf point")
    problem.accept(x1)
    return x1, null_tangent(problem, x1, e), problem


def _from_cycle(system, funcs, pv, k, lo, hi, guess, initial, settings, factor, cancel):
    if not lo <= pv[k] <= hi:
        raise ValueError(f"the current value {pv[k]:.6g} of {system.parameters[k]} lies outside the interval: "
                         "the cycle is searched for at the current value")
    try:
        cycle = find_cycle(system, pv, guess=guess, initial=initial, cancel=cancel)
    except CycleError as err:
        raise ContinuationError(f"no cycle to start from: {err}") from None
    problem = CycleProblem(funcs, pv, k, cycle.vector, factor * cycle.period)
    x0 = np.concatenate([cycle.vector, [cycle.period, pv[k]]])
    fixed = np.zeros(len(x0))
    fixed[-1] = 1.0
    x0c, _ = newton_bordered(problem, x0, fixed, settings)
    if x0c is None:
        raise ContinuationError("the cycle found could not be corrected by shooting")
    problem.accept(x0c)
    return x0c, null_tangent(problem, x0c), problem


def cycles_from_hopf_points(system, result: BranchSet, lo, hi, p=None, settings=None, cancel=None,
                            progress=None) -> BranchSet:
    """``result`` with the branch of cycles born at each of its Hopf points added (a failure becomes a note)."""
    report = Reporter(progress, cancel)
    points = hopf_points(result)
    branches, notes = list(result.branches), list(result.notes)
    for i, h in enumerate(points):
        try:
            found = cycle_branches(system, result.parameter, lo, hi, p, hopf=h, settings=settings, cancel=cancel,
                                   progress=report.part(i / len(points), 1 / len(points)))
            branches += found.branches
        except ContinuationError as err:
            notes.append(f"the cycles of the Hopf point at {result.parameter} = {h.value:.6g}: {err}")
    return BranchSet(result.parameter, branches, notes)


def hopf_points(result) -> list:
    return [s for b in result.branches for s in b.special if s.type == HOPF]
