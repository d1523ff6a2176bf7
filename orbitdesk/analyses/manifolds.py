"""Stable and unstable manifolds of a saddle of a planar flow, as curves.

Each branch starts a small step along its eigenvector (``eq ± eps * v``) and is integrated forward
(unstable branches) or backward in time (stable branches) until it leaves a box or the time runs out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from orbitdesk.engine.runs import Event, RunSettings, simulate
from orbitdesk.analyses.equilibria import Equilibrium
from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.system.compiled_system import MAP, CompiledSystem


@dataclass
class Branch:
    label: str  # "stable +", "stable -", "unstable +", "unstable -"
    points: np.ndarray  # (2, K): the equilibrium, then the start eq ± eps*v, then the integrated curve
    direction: np.ndarray  # the unit eigenvector the branch leaves along (signed)
    status: str = "ok"
    message: str = ""


@dataclass
class Manifolds:
    equilibrium: Equilibrium
    branches: list[Branch] = field(default_factory=list)

    @property
    def stable(self) -> list[Branch]:
        return [b for b in self.branches if b.label.startswith("stable")]

    @property
    def unstable(self) -> list[Branch]:
        return [b for b in self.branches if b.label.startswith("unstable")]

    def to_dict(self, max_points: int | None = None) -> dict:
        def curve(b):
            pts = b.points
            if max_points and pts.shape[1] > max_points:
                pts = pts[:, np.unique(np.linspace(0, pts.shape[1] - 1, max_points).round().astype(int))]
            return pts.T.tolist()

        return {"stable": [curve(b) for b in self.stable], "unstable": [curve(b) for b in self.unstable]}


def is_planar_saddle(system: CompiledSystem, eq: Equilibrium) -> bool:
    return (system.kind != MAP and system.n_states == 2 and eq.n_stable == 1 and eq.n_unstable == 1
            and eq.n_center == 0)


def saddle_manifolds(system: CompiledSystem, eq: Equilibrium, p=None, box: dict | None = None,
                     t_max: float | None = None, eps: float | None = None, samples: int = 2000,
                     min_spacing: float | None = None, cancel: CancelToken | None = None,
                     progress=None) -> Manifolds:
    """The four branches of the stable and unstable manifolds of the planar saddle ``eq``.

    ``box`` ({state: (lo, hi)}) ends a branch when it leaves; default: a box around the saddle.
    ``eps`` is the initial offset (default 1e-6 of the box size); ``t_max`` the integration time
    (default: enough to grow from eps to the box size at the eigenvalue's rate, three times over).
    """
    system.refuse_delays("the saddles' manifolds")
    if not is_planar_saddle(system, eq):
        raise ValueError("manifolds are computed for saddles of planar (two-state) flows")
    p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    report = Reporter(progress, cancel)
    x0 = np.asarray(eq.vector, dtype=float)
    if box is None:
        half = 4.0 * max(1.0, float(np.max(np.abs(x0))))
        box = {s: (x0[i] - half, x0[i] + half) for i, s in enumerate(system.states)}
    lows = np.array([float(box[s][0]) for s in system.states])
    highs = np.array([float(box[s][1]) for s in system.states])
    size = float(np.linalg.norm(highs - lows))
    eps = 1e-6 * size if eps is None else float(eps)
    spacing = 1e-3 * size if min_spacing is None else float(min_spacing)

    n = len(system.states)
    faces = [Event.on_plane(sign * np.eye(n)[i], sign * bound, direction=1, terminal=True)
             for i in range(n) for sign, bound in ((1.0, highs[i]), (-1.0, lows[i]))]

    branches = []
    jobs = []
    for k, value in enumerate(eq.eigenvalues):
        v = np.real(eq.eigenvectors[:, k])
        v = v / np.linalg.norm(v)
        rate = abs(float(value.real))
        name = "unstable" if value.real > 0 else "stable"
        for sign, mark in ((1.0, "+"), (-1.0, "-")):
            jobs.append((f"{name} {mark}", sign * v + 0.0, rate, 1.0 if value.real > 0 else -1.0))
    jobs.sort(key=lambda j: (not j[0].startswith("stable"), j[0]))
    for index, (label, direction, rate, time_sign) in enumerate(jobs):
        start = x0 + eps * direction
        duration = t_max if t_max is not None else 3.0 * math.log(max(size / eps, math.e)) / max(rate, 1e-12)
        settings = RunSettings(t_start=0.0, t_end=time_sign * duration, samples=samples, rtol=1e-10, atol=1e-12)
        run = simulate(system, settings, start, p, events=faces, cancel=cancel,
                       progress=report.part(index / 4, 1 / 4))
        pts, times = run.states, run.time
        exits = [(float(t[0]), y[:, 0]) for t, y in zip(run.event_times, run.event_states) if t.size]
        if exits:  # the branch leaves the box through the face it reaches first
            te, exit_point = min(exits, key=lambda e: e[0] * time_sign)
            keep = (times - te) * time_sign < 0
            pts = np.column_stack([pts[:, keep], exit_point[:, None]])
        pts = np.column_stack([x0[:, None], pts])
        branches.append(Branch(label, _thin(pts, spacing), direction, run.status, run.message))
    report(1.0)
    return Manifolds(eq, branches)


def _thin(points: np.ndarray, spacing: float) -> np.ndarray:
    """Drop points closer than ``spacing`` to the last kept one; the first three and the last stay."""
    if points.shape[1] <= 4:
        return points
    keep = [0, 1, 2]
    last = points[:, 2]
    for k in range(3, points.shape[1] - 1):
        if np.linalg.norm(points[:, k] - last) >= spacing:
            keep.append(k)
            last = points[:, k]
    keep.append(points.shape[1] - 1)
    return points[:, keep]


__all__ = ["Branch", "Manifolds", "saddle_manifolds", "is_planar_saddle"]
