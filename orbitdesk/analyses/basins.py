"""Basins of attraction: a grid of starts in two states (the other states at their initial values), each
labelled by the attractor its orbit settles on.

All starts run together on the ensemble engine's member loops: a flow by an adaptive explicit method with
its tolerances (``method``, ``rtol``, ``atol``: Dormand-Prince 8(5,3) by default, each start with its own
step control, the states at the sample times read off each step's dense output) or by classical RK4 at a
fixed step ``dt``; a map by iteration. A transient, then ``samples`` states taken every ``every`` (time, or
iterations of a map; a forced flow is sampled once per forcing period, which makes these the stroboscopic
basins). The stiff methods are refused: they run one start at a time, not as members. Orbits that leave ``escape`` or fail are
labelled escape (-1). The others are grouped by where their samples lie (the range of every state over
the samples, to ``tol`` of the grid's size): each group is one attractor, described as an equilibrium
(the samples do not move), a cycle of period k of the map or the stroboscopic map, or for an autonomous
flow a limit cycle with its period and Floquet multipliers (``analyses.cycles.find_cycle``, shot from the
last sample of one orbit on it); no period found means chaotic or quasi-periodic.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.engine.methods import DEFAULT
from orbitdesk.engine.model_events import refuse_ensembles
from orbitdesk.engine.ensembles import iterate_ensemble, rk4_ensemble
from orbitdesk.analyses.grids import GridAxes
from orbitdesk.analyses.parameter_maps import minimal_periods
from orbitdesk.analyses.sweep import _check_accuracy as check_accuracy
from orbitdesk.engine.progress import Reporter
from orbitdesk.system.compiled_system import MAP

ESCAPE = -1
MAX_STARTS = 250_000
OSCILLATION = "oscillation"


@dataclass
class BasinSettings:
    transient: float = 200.0  # time (flows; a forced flow: rounded up to whole periods) or iterations (maps)
    samples: int = 48         # states kept per start after the transient
    every: float = 0.5        # between samples (flows without forcing); maps: iterations (rounded)
    period: float | None = None  # forcing period: sample once per period (stroboscopic basins)
    dt: float | None = None   # a fixed RK4 step (a forcing period is divided exactly); None: adaptive steps
    method: str | None = None  # without dt: an adaptive explicit method of engine/methods.py (None: dop853)
    rtol: float = 1e-8        # its tolerances (a single run's defaults)
    atol: float = 1e-10
    escape: float = 1e3       # |state| beyond this counts as escape
    tol: float = 1e-3         # attractors closer than this (relative to the grid's size) are one


@dataclass
class BasinResult(GridAxes):  # x_name, xs, y_name, ys: the two states
    labels: np.ndarray  # (ny, nx): index into attractors, or ESCAPE
    attractors: list[dict] = field(default_factory=list)  # {"label", "kind", "period", "centre", "share"}
    stroboscopic: bool = False
    method: str = ""  # how a flow's starts were integrated: the adaptive method's name, or "rk4" (fixed step)

    def to_dict(self) -> dict:
        return {**self.axes_dict("state"), "labels": self.labels.tolist(), "attractors": self.attractors,
                "escape": ESCAPE, "stroboscopic": self.stroboscopic, "method": self.method}


def basins(system, x_name: str, xs, y_name: str, ys, settings: BasinSettings | None = None, u0=None, p=None,
           cancel=None, progress=None) -> BasinResult:
    """The basins of attraction over the grid ``ys x xs`` of starts (rows: y); see the module notes."""
    system.refuse_delays("basins of attraction")
    s = settings or BasinSettings()
    refuse_ensembles(system, "Basins of attraction")
    for name in (x_name, y_name):
        if name not in system.states:
            raise ValueError(f"'{name}' is not a state (states: {', '.join(system.states)})")
    if x_name == y_name:
        raise ValueError("the starts need two different states")
    xs, ys = np.asarray(xs, dtype=float).ravel(), np.asarray(ys, dtype=float).ravel()
    if xs.size < 1 or ys.size < 1 or not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise ValueError("the grid of starts must be finite numbers")
    if xs.size * ys.size > MAX_STARTS:
        raise ValueError(f"{xs.size * ys.size:,} starts is more than the {MAX_STARTS:,} allowed")
    if int(s.samples) < 4 or not (s.transient >= 0 and s.escape > 0 and s.tol > 0):
        raise ValueError("basins need at least 4 samples, a transient of 0 or more and a positive escape bound")
    if system.kind != MAP:
        check_basin_accuracy(s)
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    gx, gy = np.meshgrid(xs, ys)
    U = np.repeat(u0[:, None], gx.size, axis=1)
    U[system.states.index(x_name)] = gx.ravel()
    U[system.states.index(y_name)] = gy.ravel()
    report = Reporter(progress, cancel)
    cycles_part = 0.1 if system.kind != MAP and s.period is None else 0.0
    samples, ok = _run(system, U, p, s, report.part(0.0, 1.0 - cycles_part))
    labels, attractors, tracks = _group(system, samples, ok, s, span=max(np.ptp(xs), np.ptp(ys), 1e-12))
    if cycles_part:
        same = _cycle_periods(system, p, attractors, tracks, report.part(1.0 - cycles_part, cycles_part), cancel)
        labels, attractors = _merged(labels, attractors, same)
        tracks = [t for a, t in zip(range(len(tracks)), tracks) if a not in same]
    labels, attractors = _merged(labels, attractors, _same_chaos(attractors, tracks))
    report(1.0)
    return BasinResult(x_name, xs, y_name, ys, labels.reshape(ys.size, xs.size), attractors,
                       stroboscopic=system.kind != MAP and s.period is not None,
                       method="" if system.kind == MAP else "rk4" if s.dt is not None else s.method or DEFAULT)


def check_basin_accuracy(s: BasinSettings) -> None:
    """A flow's step or adaptive method and tolerances; ValueError in plain words (a stiff method: why not)."""
    from orbitdesk.engine.methods import NAMES, method

    if s.dt is None and s.method is not None and s.method in NAMES and method(s.method).stiff:
        raise ValueError(f"basins run every start together in the explicit member loops; the stiff method "
                         f"'{s.method}' runs one orbit at a time. Choose "
                         f"{', '.join(m for m in NAMES if method(m).adaptive and not method(m).stiff)} "
                         "or a fixed RK4 step")
    check_accuracy(s, stiff_allowed=False)


def _run(system, U, p, s: BasinSettings, report):
    """(samples (n, M, K), ok (M,)): the states after the transient, and which starts stayed bounded."""
    K = int(s.samples)
    M = U.shape[1]
    out = np.full((system.n_states, M, K), np.nan)
    ok = np.ones(M, dtype=bool)
    if system.kind == MAP:
        first, every = int(math.ceil(s.transient)), max(1, int(round(s.every)))
        steps = [first] + [every] * (K - 1)

        def advance(V, n_steps, t, part):
            return iterate_ensemble(system, V, p, n_steps=n_steps, n0=int(t), bound=s.escape, cancel=report.cancel,
                                    progress=part), float(n_steps)
    elif s.dt is None:  # adaptive: one run of every member, the samples read off the dense output
        return _run_adaptive(system, U, p, s, report)
    else:
        if s.period is not None:
            T = float(s.period)
            per = max(1, int(math.ceil(T / s.dt - 1e-9)))
            h = T / per
            steps = [per * int(math.ceil(s.transient / T - 1e-9))] + [per] * (K - 1)
        else:
            h = float(s.dt)
            every = max(1, int(round(s.every / h)))
            steps = [int(math.ceil(s.transient / h - 1e-9))] + [every] * (K - 1)

        def advance(V, n_steps, t, part):
            return rk4_ensemble(system, V, p, t0=t, dt=h, n_steps=n_steps, bound=s.escape, cancel=report.cancel,
                                progress=part), n_steps * h
    total, done, t = float(sum(steps)) or 1.0, 0.0, 0.0
    V = U
    for k, n_steps in enumerate(steps):
        if n_steps > 0:
            result, span = advance(V, n_steps, t, report.part(done / total, n_steps / total))
            V, t = result.states, t + span
            ok &= result.status == "ok"
        done += n_steps
        report(done / total)  # also where a cancel is noticed
        out[:, :, k] = V
    ok &= np.all(np.isfinite(out), axis=(0, 2)) & np.all(np.abs(np.nan_to_num(out, nan=np.inf)) <= s.escape, axis=(0, 2))
    return out, ok


def sample_times(s: BasinSettings) -> np.ndarray:
    """The times a flow's starts are looked at (from t = 0): after the transient (a forced flow: whole
    forcing periods, then once per period), ``samples`` of them ``every`` apart."""
    K = int(s.samples)
    if s.period is not None:
        T = float(s.period)
        return T * (math.ceil(s.transient / T - 1e-9) + np.arange(K))
    return float(s.transient) + float(s.every) * np.arange(K)


def _run_adaptive(system, U, p, s: BasinSettings, report):
    """``_run`` of a flow by an adaptive method: every start a member of one ``drivers.members_run`` with its
    own step control, stopped where it passes the escape bound."""
    from orbitdesk.engine import compiled as kernels
    from orbitdesk.engine import drivers
    from orbitdesk.engine.status import OK, words

    grid = sample_times(s)
    n, M = U.shape
    out = np.full((n, M, grid.size), np.nan)
    later = grid > 0.0
    out[:, :, ~later] = U[:, :, None]  # (a transient of 0: the starts are the first samples)
    ok = np.ones(M, dtype=bool)
    if later.any():
        engine = kernels.engine_for_work(system, 12.0 * M * grid[-1] / 0.05)
        with np.errstate(all="ignore"):
            run = drivers.members_run(engine, s.method or DEFAULT, 0.0, float(grid[-1]), U, p, rtol=s.rtol,
                                      atol=s.atol, bound=s.escape, grid=grid[later], report=report)
        out[:, :, later] = run.samples
        ok = words(run.codes) == OK
    report(1.0)
    ok &= np.all(np.isfinite(out), axis=(0, 2)) & np.all(np.abs(np.nan_to_num(out, nan=np.inf)) <= s.escape, axis=(0, 2))
    return out, ok


def _group(system, samples, ok, s: BasinSettings, span: float):
    """Labels per start and the attractors: starts whose samples cover the same ranges share one."""
    n, M, K = samples.shape
    labels = np.full(M, ESCAPE, dtype=int)
    lo, hi = np.nanmin(samples, axis=2), np.nanmax(samples, axis=2)  # (n, M)
    scale = max(span, float(np.nanmax(np.abs(samples[:, ok]), initial=0.0)) if ok.any() else span, 1e-12)
    tol = s.tol * scale
    signature = np.vstack([lo, hi]).T  # (M, 2n)
    attractors: list[dict] = []
    centres: list[np.ndarray] = []
    members = np.flatnonzero(ok)
    keys = np.round(signature[members] / (4 * tol)).astype(np.int64)
    _, first, inverse = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    group_label, tracks = {}, []
    for g, i in enumerate(first):
        sig = signature[members[i]]
        match = next((a for a, c in enumerate(centres) if np.max(np.abs(c - sig)) <= 8 * tol), None)
        if match is None:
            match = len(centres)
            centres.append(sig)
            attractors.append(_describe(system, samples[:, members[i], :], tol, s, match))
            tracks.append(samples[:, members[i], :])
        group_label[g] = match
    labels[members] = np.array([group_label[g] for g in np.ravel(inverse)], dtype=int)
    for a in attractors:
        a["share"] = float(np.mean(labels == a["label"]))
    return labels, attractors, tracks


def _cycle_periods(system, p, attractors, tracks, progress, cancel) -> dict[int, int]:
    """Autonomous flows: the period, stability and largest non-trivial Floquet multiplier of each
    oscillating attractor, by shooting from the last sample of its orbit (``cycles.find_cycle``). Returns
    {label: label} of groups that lie on a cycle found for an earlier group (their samples covered other
    parts of the same cycle): one attractor."""
    from orbitdesk.analyses.cycles import CycleError, find_cycle

    moving = [a for a in attractors if a["kind"] == OSCILLATION]
    found, same = [], {}
    for k, a in enumerate(moving):
        last = tracks[a["label"]][:, -1]
        twin = next((b for b, orbit in found if _on_orbit(last, orbit)), None)
        if twin is not None:
            same[a["label"]] = twin["label"]
            continue
        try:
            cycle = find_cycle(system, p, guess=last, transient=200.0, cancel=cancel,
                               progress=progress.part(k / len(moving), 1 / len(moving)))
        except (CycleError, ValueError, np.linalg.LinAlgError):
            a["kind"] = "oscillation without a period found (chaotic or quasi-periodic)"
            continue
        others = cycle.nontrivial_multipliers
        a.update(kind="limit cycle" if cycle.stable else "cycle (unstable: the samples only pass near it)",
                 period=float(cycle.period), multiplier=float(np.max(np.abs(others))) if others.size else 0.0,
                 centre={name: float(v) for name, v in zip(system.states, np.mean(cycle.orbit[:, :-1], axis=1))})
        found.append((a, cycle.orbit))
    return same


def _same_chaos(attractors, tracks, overlap: float = 0.5) -> dict[int, int]:
    """{label: label} folding together the attractors without a period whose samples cover the same region: the
    samples of a chaotic attractor from different starts never span quite the same ranges, so each start became
    an attractor of its own (128 "chaotic" attractors in the shaken beam's basin map, all one). Two are one when
    their sample boxes overlap by ``overlap`` of the smaller box's extent in every state."""
    loose = [a for a in attractors if a["kind"].startswith(("no period", "oscillation without a period"))]
    same: dict[int, int] = {}
    boxes = {a["label"]: (np.min(tracks[a["label"]], axis=1), np.max(tracks[a["label"]], axis=1)) for a in loose}
    kept: list[int] = []
    for a in loose:
        lo, hi = boxes[a["label"]]
        for b in kept:
            blo, bhi = boxes[b]
            shared = np.minimum(hi, bhi) - np.maximum(lo, blo)
            least = np.maximum(np.minimum(hi - lo, bhi - blo), 1e-12)
            if np.all(shared >= overlap * least):
                same[a["label"]] = b
                boxes[b] = (np.minimum(lo, blo), np.maximum(hi, bhi))
                break
        else:
            kept.append(a["label"])
    return same


def _on_orbit(u, orbit) -> bool:
    """Whether the state u lies on the sampled closed orbit (n, K), to a small part of its size."""
    gaps = np.linalg.norm(np.diff(orbit, axis=1), axis=0)
    size = float(np.max(np.ptp(orbit, axis=1)))
    distance = float(np.min(np.linalg.norm(orbit - np.asarray(u)[:, None], axis=0)))
    return distance <= float(np.max(gaps, initial=0.0)) + 1e-3 * size


def _merged(labels, attractors, same: dict[int, int]):
    """Labels and attractors with the groups in ``same`` folded into their twins, numbered 0, 1, ... again."""
    if not same:
        return labels, attractors
    labels = labels.copy()
    for a, b in same.items():
        labels[labels == a] = b
    kept = [a for a in attractors if a["label"] not in same]
    number = {a["label"]: k for k, a in enumerate(kept)}
    moved = labels >= 0
    labels[moved] = [number[v] for v in labels[moved]]
    for a in kept:
        a["label"] = number[a["label"]]
        a["share"] = float(np.mean(labels == a["label"]))
    return labels, kept


def _describe(system, track, tol, s: BasinSettings, label: int) -> dict:
    """What one attractor is, from the samples of one orbit on it: (n, K)."""
    spread = float(np.max(np.ptp(track, axis=1)))
    centre = {name: float(v) for name, v in zip(system.states, np.mean(track, axis=1))}
    if spread <= tol:
        kind, period = ("fixed point" if system.kind == MAP else
                        "period-1 response" if s.period is not None else "equilibrium"), 1
    elif system.kind == MAP or s.period is not None:
        period = int(minimal_periods(track[0:1], track.shape[1] // 2, tol=1e-5)[0])
        kind = f"cycle of period {period}" if period > 0 else "no period (chaotic or quasi-periodic)"
    else:
        kind, period = OSCILLATION, 0  # autonomous flows: settled by _cycle_periods
    return {"label": label, "kind": kind, "period": period, "centre": centre, "spread": spread}


__all__ = ["BasinSettings", "BasinResult", "basins", "ESCAPE"]
