"""Nullclines of planar flows: the curves where one component of the vector field vanishes.

Each component is evaluated on a grid (vectorized) and contoured at zero by marching squares with
linear interpolation along cell edges; saddle cells are resolved with the cell-centre value, and
the segments are joined into polylines.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from orbitdesk.system.compiled_system import MAP, CompiledSystem


@dataclass
class Nullcline:
    component: str  # the state whose derivative vanishes on these curves
    segments: list[np.ndarray] = field(default_factory=list)  # polylines, each (2, K)

    def to_dict(self) -> dict:
        return {"component": self.component, "segments": [s.T.tolist() for s in self.segments]}


def nullclines(system: CompiledSystem, p=None, x_range=(-1.0, 1.0), y_range=(-1.0, 1.0),
               resolution: int = 200, t: float = 0.0) -> list[Nullcline]:
    """The nullclines of each component of a planar flow over the rectangle x_range x y_range.

    ``resolution`` grid points per axis (at least 3). For a non-autonomous flow the field is taken
    at time ``t``.
    """
    if system.kind == MAP:
        raise ValueError("nullclines are defined for flows, not maps")
    if system.n_states != 2:
        raise ValueError(f"nullclines are drawn for planar flows; this model has {system.n_states} states")
    resolution = int(resolution)
    if resolution < 3:
        raise ValueError("the resolution must be at least 3")
    (x0, x1), (y0, y1) = map(float, x_range), map(float, y_range)
    if not (x1 > x0 and y1 > y0):
        raise ValueError("each range must have low < high")
    xs = np.linspace(x0, x1, resolution)
    ys = np.linspace(y0, y1, resolution)
    X, Y = np.meshgrid(xs, ys)  # (ny, nx): row i is y = ys[i]
    p = system.param_values if p is None else np.asarray(p, dtype=float)
    F = system.rhs_vec(float(t), np.vstack([X.ravel(), Y.ravel()]), p)
    return [Nullcline(name, contour_zero(xs, ys, F[k].reshape(X.shape)))
            for k, name in enumerate(system.states)]


def contour_zero(xs: np.ndarray, ys: np.ndarray, V: np.ndarray) -> list[np.ndarray]:
    """Polylines (each (2, K)) where the grid function ``V[i, j]`` at (xs[j], ys[i]) crosses zero."""
    V = np.asarray(V, dtype=float)
    ny, nx = V.shape
    pos = V >= 0
    finite = np.isfinite(V)

    def h_point(i, j):  # on the edge (i, j)-(i, j+1)
        a, b = V[i, j], V[i, j + 1]
        s = a / (a - b)
        return (xs[j] + s * (xs[j + 1] - xs[j]), ys[i])

    def v_point(i, j):  # on the edge (i, j)-(i+1, j)
        a, b = V[i, j], V[i + 1, j]
        s = a / (a - b)
        return (xs[j], ys[i] + s * (ys[i + 1] - ys[i]))

    c00, c10 = pos[:-1, :-1], pos[:-1, 1:]  # bottom-left, bottom-right
    c01, c11 = pos[1:, :-1], pos[1:, 1:]  # top-left, top-right
    ok = finite[:-1, :-1] & finite[:-1, 1:] & finite[1:, :-1] & finite[1:, 1:]
    code = (c00 * 1 + c10 * 2 + c11 * 4 + c01 * 8).astype(int)
    cells = np.argwhere(ok & (code != 0) & (code != 15))

    # edges of cell (i, j): bottom ("h", i, j), top ("h", i+1, j), left ("v", i, j), right ("v", i, j+1)
    segments = []
    for i, j in cells:
        c = code[i, j]
        bottom, top = ("h", i, j), ("h", i + 1, j)
        left, right = ("v", i, j), ("v", i, j + 1)
        crossing = []
        if (c & 1) != ((c >> 1) & 1):
            crossing.append(bottom)
        if ((c >> 1) & 1) != ((c >> 2) & 1):
            crossing.append(right)
        if ((c >> 2) & 1) != ((c >> 3) & 1):
            crossing.append(top)
        if ((c >> 3) & 1) != (c & 1):
            crossing.append(left)
        if len(crossing) == 2:
            segments.append((crossing[0], crossing[1]))
        elif len(crossing) == 4:  # saddle cell: decide by the centre value
            centre_pos = (V[i, j] + V[i, j + 1] + V[i + 1, j] + V[i + 1, j + 1]) / 4 >= 0
            bottom_left_pos = bool(c & 1)
            if centre_pos == bottom_left_pos:  # the bottom-left/top-right diagonal is connected
                segments += [(bottom, right), (left, top)]
            else:
                segments += [(bottom, left), (right, top)]

    def point(key):
        kind, i, j = key
        return h_point(i, j) if kind == "h" else v_point(i, j)

    return [np.array([point(k) for k in chain]).T for chain in _chains(segments)]


def _chains(segments):
    """Join segments sharing an edge key into maximal polylines (open ones first, then loops)."""
    neighbours: dict = {}
    for a, b in segments:
        neighbours.setdefault(a, []).append(b)
        neighbours.setdefault(b, []).append(a)
    used: set = set()

    def walk(start):
        chain = [start]
        current = start
        while True:
            nxt = None
            for cand in neighbours[current]:
                edge = frozenset((current, cand)) if cand != current else (current,)
                if edge not in used:
                    nxt = cand
                    used.add(edge)
                    break
            if nxt is None:
                return chain
            chain.append(nxt)
            current = nxt
            if current == start:
                return chain

    chains = []
    for key, adj in neighbours.items():
        if len(adj) == 1 and frozenset((key, adj[0])) not in used:
            chains.append(walk(key))
    for key in neighbours:
        if any(frozenset((key, c)) not in used for c in neighbours[key]):
            chains.append(walk(key))
    return [c for c in chains if len(c) >= 2]


__all__ = ["Nullcline", "nullclines", "contour_zero"]
