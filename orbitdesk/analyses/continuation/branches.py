"""Equilibrium branches of flows and fixed-point branches of maps in one parameter.

Every equilibrium (fixed point of f^K) found at the start value, or the one nearest a guess, is
continued both ways; a start that lies on a branch already computed is skipped. On request, branches
are switched at branch points (onto the other branch through the point, along the null direction
of DG orthogonal to the branch) and, for maps, at period doublings (onto the doubled branch: a
period doubling of f^K is a branch point of the fixed points of f^2K).
"""

from __future__ import annotations

import numpy as np

from orbitdesk.analyses.conservative import holds_at, neutral_words
from orbitdesk.analyses.cycles import CycleError, find_map_cycle
from orbitdesk.analyses.equilibria import find_equilibria
from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem
from orbitdesk.analyses.continuation.arclength import Curve, StepSettings, continue_curve, newton_bordered, null_tangent
from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions
from orbitdesk.analyses.continuation.points import EquilibriumProblem, FixedPointProblem, map_iterate
from orbitdesk.analyses.continuation.results import BRANCH_POINT, EQUILIBRIUM, FIXED_POINT, FOLD, PERIOD_DOUBLING, Branch, BranchSet, Special

MAX_BRANCHES = 12


def default_settings(lo: float, hi: float, max_points: int = 400) -> StepSettings:
    span = max(abs(hi - lo), 1e-12)
    return StepSettings(ds=span / 200, ds_min=span * 1e-9, ds_max=span / 40, max_points=max_points)


def check_interval(system: CompiledSystem, param: str, lo: float, hi: float):
    if param not in system.parameters:
        known = ", ".join(system.parameters) or "none"
        raise ValueError(f"unknown parameter '{param}' (parameters: {known})")
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo == hi:
        raise ValueError("the parameter interval needs two different finite ends")
    return (lo, hi) if lo < hi else (hi, lo)


def steady_branches(system: CompiledSystem, param: str, lo: float, hi: float, p=None, guess=None,
                    map_period: int = 1, settings: StepSettings | None = None, switch: bool = True,
                    initial=None, cancel: CancelToken | None = None, progress=None) -> BranchSet:
    """Branches of equilibria (flows) or of fixed points of f^K (maps, K = ``map_period``)."""
    system.refuse_delays("continuation")
    lo, hi = check_interval(system, param, lo, hi)
    if not system.autonomous_at(p) and system.kind != MAP:
        raise ValueError(f"the equations depend on {system.time_name}: a forced flow has no equilibria; follow "
                         "its periodic response instead (orbitdesk response, or the bifurcation diagram's "
                         "forced response)")
    report = Reporter(progress, cancel)
    funcs = ModelFunctions(system)
    k = funcs.param_index(param)
    pv = (system.param_values if p is None else np.asarray(p, dtype=float)).astype(float).copy()
    notes = []
    if not lo <= pv[k] <= hi:
        pv[k] = min(max(pv[k], lo), hi)
        notes.append(f"the continuation starts at {param} = {pv[k]:.6g}, the end of the interval nearest "
                     "the current value")
    settings = settings or default_settings(lo, hi)
    starts = _starts(system, pv, guess, map_period, initial, cancel, report.part(0.0, 0.1))
    if not starts:
        what = "fixed point" if system.kind == MAP else "equilibrium"
        notes.append(f"no {what} was found at {param} = {pv[k]:.6g} to start from")
    kind = FIXED_POINT if system.kind == MAP else EQUILIBRIUM
    branches: list[Branch] = []
    curves: list[np.ndarray] = []
    queue = [(u, None, map_period, None) for u in starts]
    done = 0
    while queue and len(branches) < MAX_BRANCHES:
        u, tangent, K, origin = queue.pop(0)
        problem = _problem(funcs, pv, k, K)
        x0 = np.append(np.asarray(u, dtype=float), pv[k]) if tangent is None else u
        problem.conservative = bool(neutral_words(system, pv, free=(param,))[1]) and \
            holds_at(system, x0[:-1], pv, free=(param,))
        if tangent is None:
            _scale_steps(settings, lo, hi, x0)
            x0, tangent = _first_point(problem, x0, settings)
            if x0 is None:
                notes.append("a start point could not be corrected onto its branch")
                continue
        if not lo <= x0[-1] <= hi or any(_on_curve(x0, c, problem.n) for c in curves):
            continue
        part = report.part(0.1 + 0.9 * min(done, 8) / 9, 0.9 / 9)
        curve = continue_curve(problem, x0, tangent, lo, hi, settings, both=True, cancel=cancel, progress=part)
        done += 1
        if len(curve.xs) < 2:
            continue
        branch = _branch(kind, system, param, curve, K, origin, pv)
        branches.append(branch)
        curves.append(np.array(curve.xs))
        if switch:
            queue += _switches(funcs, pv, k, K, curve, settings)
    if queue and len(branches) >= MAX_BRANCHES:
        notes.append(f"stopped after {MAX_BRANCHES} branches")
    report(1.0)
    return BranchSet(param, branches, notes)


def _scale_steps(settings, lo, hi, x0):
    """Longest step from the larger of the interval and the state's size: a branch that travels far in
    the state while the parameter moves little (an S-shaped branch) then needs no more points."""
    size = 1.0 + float(np.max(np.abs(x0[:-1]), initial=0.0))
    settings.ds_max = max(settings.ds_max, max(abs(hi - lo), size) / 40)


def _problem(funcs, pv, k, K):
    if funcs.is_map:
        return FixedPointProblem(funcs, pv, k, map_iterate(funcs, K))
    return EquilibriumProblem(funcs, pv, k)


def _starts(system, pv, guess, K, initial, cancel, report):
    guess_vec = None if guess is None else (system.initial_vector(guess) if isinstance(guess, dict)
                                            else np.asarray(guess, dtype=float))
    if system.kind == MAP and K > 1:
        try:
            cycle = find_map_cycle(system, pv, K, guess=guess_vec, initial=initial, cancel=cancel)
        except (CycleError, ValueError):
            return []
        if cycle.period != K:
            return []
        return [cycle.points[:, 0]]
    found = find_equilibria(system, pv, u0=guess_vec if guess_vec is not None else initial, exact_timeout=2.0,
                            cancel=cancel, progress=report)
    points = [eq.vector for eq in found]
    if guess_vec is not None and points:
        points = [min(points, key=lambda v: float(np.linalg.norm(v - guess_vec)))]
    return points


def _first_point(problem, x0, settings):
    try:
        x, _ = newton_bordered(problem, x0, _unit(problem.size - 1, problem.size), settings)
        if x is None:
            return None, None
        return x, null_tangent(problem, x)
    except (ContinuationError, np.linalg.LinAlgError):
        return None, None


def _unit(i, size):
    e = np.zeros(size)
    e[i] = 1.0
    return e


def _on_curve(x, xs, n) -> bool:
    """Whether x lies on the polyline xs (within a share of the local segment length)."""
    if len(xs) == 0:
        return False
    if len(xs) == 1:
        return bool(np.linalg.norm(xs[0] - x) < 1e-7 * (1 + np.linalg.norm(x)))
    a, b = xs[:-1], xs[1:]
    d = b - a
    lengths = np.einsum("ij,ij->i", d, d)
    share = np.clip(np.einsum("ij,ij->i", x - a, d) / np.where(lengths > 0, lengths, 1.0), 0.0, 1.0)
    gaps = np.linalg.norm(a + share[:, None] * d - x, axis=1)
    tol = 0.05 * np.sqrt(lengths) + 1e-7 * (1 + np.linalg.norm(x))
    return bool(np.any(gaps <= tol))


def _switches(funcs, pv, k, K, curve: Curve, settings):
    """Start points (x, tangent, K) of the branches crossing this one at its branch points and, for
    maps, of the doubled branches at its period doublings."""
    out = []
    for s in curve.special:
        if s.type == BRANCH_POINT:
            problem = _problem(funcs, pv, k, K)
            K_new = K
        elif s.type == PERIOD_DOUBLING and funcs.is_map:
            K_new = 2 * K
            problem = _problem(funcs, pv, k, K_new)
        else:
            continue
        try:
            V = np.linalg.svd(problem.jacobian(s.x))[2][-2:]
        except (ContinuationError, np.linalg.LinAlgError):
            continue
        t = s.tangent if s.tangent is not None else null_tangent(problem, s.x)
        other = V - np.outer(V @ t, t)
        w = other[int(np.argmax(np.linalg.norm(other, axis=1)))]
        if np.linalg.norm(w) < 1e-6:
            continue
        w = w / np.linalg.norm(w)
        step = 4 * settings.ds
        x1, _ = newton_bordered(problem, s.x + step * w, w, settings)
        if x1 is None or not 0.1 * step < np.linalg.norm(x1 - s.x) < 3 * step:
            continue
        tangent = (x1 - s.x) / np.linalg.norm(x1 - s.x)
        out.append((x1, tangent, K_new, s.x))
    return out


def _branch(kind, system, param, curve: Curve, K, origin=None, pv=None) -> Branch:
    xs = np.array(curve.xs)
    values, points = xs[:, -1], xs[:, :-1].T
    specials = []
    bps = [s for s in curve.special if s.type == BRANCH_POINT]
    for s in curve.special:
        if origin is not None and s.type in (FOLD, BRANCH_POINT) and \
                np.linalg.norm(s.x - origin) < 1e-5 * (1 + np.linalg.norm(origin)):
            continue  # where this branch was switched onto: the parent branch reports the point
        if s.type == FOLD and any(np.linalg.norm(s.x - b.x) < 1e-6 * (1 + np.linalg.norm(s.x)) for b in bps):
            continue  # the parameter turns at a pitchfork: the branch point says it
        specials.append(to_special(system, s))
    return Branch(kind, param, list(system.states), values, points, [d["stable"] for d in curve.data],
                  [d["spectrum"] for d in curve.data], specials, list(curve.reasons), map_period=K,
                  neutral=neutral_words(system, pv, free=(param,))[1] if holds_at(system, points, pv, (param,)) else "")


def to_special(system, s, state_size=None) -> Special:
    n = system.n_states if state_size is None else state_size
    x = np.where(np.abs(s.x) < 1e-13 * max(1.0, float(np.max(np.abs(s.x)))), 0.0, s.x) + 0.0
    info = s.info
    special = Special(s.type, float(x[-1]), {name: float(v) for name, v in zip(system.states, x[:n])}, s.index,
                      frequency=info.get("frequency"), first_lyapunov_coefficient=info.get("first_lyapunov_coefficient"),
                      period=info.get("period"))
    special.internal = {"x": x, "tangent": s.tangent, **{k[1:]: v for k, v in info.items() if k.startswith("_")}}
    return special
