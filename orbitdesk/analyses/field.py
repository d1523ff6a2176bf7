"""Direction field of a flow on a rectangular grid in a plane of two states."""

from __future__ import annotations

import numpy as np

from orbitdesk.system.compiled_system import CompiledSystem


def direction_field(system: CompiledSystem, p, x_range, y_range, n: int = 20, *, t: float = 0.0,
                    axes: tuple[int, int] = (0, 1), base=None):
    """The vector field (U, V) at grid points (X, Y), each of shape (ny, nx), in one vectorized evaluation.

    ``axes`` are the indices of the two states spanning the plane; the other states are held at
    ``base`` (default: the model's initial values). ``n`` is the number of points along each axis
    (an int, or a pair (nx, ny)). Points where the field is undefined come out as NaN.
    """
    system.refuse_delays("the direction field")
    nx, ny = (int(n), int(n)) if np.ndim(n) == 0 else (int(n[0]), int(n[1]))
    if nx < 1 or ny < 1:
        raise ValueError("the grid needs at least one point along each axis")
    i, j = axes
    if i == j or not (0 <= i < system.n_states and 0 <= j < system.n_states):
        raise ValueError(f"axes {axes} are not two different states of this system")
    xs = np.linspace(float(x_range[0]), float(x_range[1]), nx)
    ys = np.linspace(float(y_range[0]), float(y_range[1]), ny)
    X, Y = np.meshgrid(xs, ys)
    base = system.initial if base is None else np.asarray(base, dtype=float)
    U = np.repeat(base.reshape(-1, 1), X.size, axis=1)
    U[i], U[j] = X.ravel(), Y.ravel()
    P = system.param_values if p is None else np.asarray(p, dtype=float)
    F = system.rhs_vec(float(t), U, P)
    F[:, ~np.all(np.isfinite(F), axis=0)] = np.nan
    return X, Y, F[i].reshape(X.shape), F[j].reshape(X.shape)
