"""Many independent members (initial states and/or parameter sets): each member runs the explicit
Runge-Kutta loop with its own step control (``explicit_rk.erk_advance``) in turn, inside one
compiled call. A member that blows up or meets an undefined value stops with its status; the
others go on. Samples on a common grid (strobe times, output times) come off each member's dense
output; plane crossings (sections) and rate crossings (local maxima) are located there too.

The model's kernel comes in as an argument, as in ``explicit_rk.py``.
"""

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, erk_advance
from orbitdesk.engine.jitting import loop


@loop
def members_advance(f, kind, adaptive, U, P, t0, t_end, rtol, atol, max_step, bound, grid, samples,
                    planes, plane_dir, terminal, ev_t, ev_y, ev_count, codes, t_reached, steps):
    """Run every row of U (N x n, in place: the state reached) from t0 to t_end[i] with the
    parameters P[i] (or P[0] for all when P has one row).

    ``samples`` (N, K, n): the states at ``grid``; ``ev_t`` (N, E), ``ev_y`` (N, E, n): the first E
    crossings of ``planes`` (a member stops once it has E of them); ``ev_count`` how many each has.
    ``codes``, ``t_reached``, ``steps``: per member status code, end time, accepted steps."""
    N, n = U.shape
    K = np.zeros((16, n))
    F = np.zeros((7, n))
    st = np.zeros(12)
    out_t = np.empty(grid.shape[0])
    ev_k = np.empty(ev_t.shape[1], dtype=np.int64)
    shared = P.shape[0] == 1
    for i in range(N):
        st[:] = 0.0
        st[0] = t0
        p = P[0] if shared else P[i]
        code = erk_advance(f, kind, 0, adaptive, U[i], p, K, F, st, t_end[i], rtol, atol, max_step, bound, grid,
                           out_t, samples[i], False, planes, plane_dir, terminal, ev_t[i], ev_y[i], ev_k,
                           1 << 60)
        if code == PAUSED:  # the crossings buffer is full: this member has all it needs
            code = 0
        codes[i] = code
        t_reached[i] = st[0]
        steps[i] = st[2]
        ev_count[i] = st[7]
        for k in range(int(st[6]), grid.shape[0]):  # samples never reached
            for j in range(n):
                samples[i, k, j] = np.nan
    return 0
