"""Iterated maps u[k+1] = f(k, u[k]): the orbit loop, and many members (starts and/or parameter
sets) one after the other with their iterates and tangent vectors (sweeps, exponent grids).

The model's kernel ``f`` (here: the map) comes in as an argument, as in ``explicit_rk.py``.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, state_code
from orbitdesk.engine.jitting import loop
from orbitdesk.engine.tangent import gram_schmidt


@loop
def map_advance(f, y, p, st, n_end, out_y, bound, max_steps):
    """Iterate from step st[0] (y in place) up to step ``n_end``, writing each iterate to
    ``out_y[st[5]]``, ``st[5] + 1``, ...; returns a status code, or PAUSED when the step budget or
    the buffer ran out."""
    n = y.shape[0]
    k = int(st[0])
    written = int(st[5])
    nxt = np.empty(n)
    steps = 0
    code = 0
    while k < n_end:
        if steps >= max_steps or written >= out_y.shape[0]:
            code = PAUSED
            break
        f(0, float(k), y, p, nxt)
        code = state_code(nxt, bound)
        if code != 0:
            break
        for i in range(n):
            y[i] = nxt[i]
            out_y[written, i] = nxt[i]
        written += 1
        k += 1
        steps += 1
    st[0] = k
    st[5] = written
    return code


@loop
def members_iterate(f, U, P, n0, n_end, keep_from, bound, samples, codes, reached, m, sums):
    """Iterate every row of U (N x n(m+1), in place) from step n0 to ``n_end`` with the parameters
    P[i] (or P[0] for all); the iterates after step ``keep_from`` go to ``samples[i]`` (the first K).
    With m tangent vectors (z = (u, V), the kernel's ``which = m``) V is re-orthonormalised every
    step and the logarithms after ``keep_from`` summed into ``sums[i, :m]`` (``sums[i, m]`` counts the
    steps). ``codes``, ``reached``: per member status code and the step reached."""
    N, nz = U.shape
    n = nz // (m + 1)
    nxt = np.empty(nz)
    W = nxt[n:].reshape((n, m))
    norms = np.empty(max(m, 1))
    stretch = np.ones(max(m, 1))  # the product of the stretches since their logarithms were last added
    shared = P.shape[0] == 1
    K = samples.shape[1]
    for i in range(N):
        p = P[0] if shared else P[i]
        z = U[i]
        k = n0
        code = 0
        for j in range(m):
            stretch[j] = 1.0
        while k < n_end:
            f(m, float(k), z, p, nxt)
            code = state_code(nxt[:n], bound)
            if code != 0:
                break
            if m > 0 and not gram_schmidt(W, norms):  # the Jacobian is singular on the orbit
                if k + 1 > keep_from:
                    code = 2
                    break
                for a in range(n):  # within the transient (a start that lands on a critical point): afresh
                    for b in range(m):
                        W[a, b] = 1.0 if a == b else 0.0
            for j in range(nz):
                z[j] = nxt[j]
            k += 1
            if k > keep_from:
                r = k - keep_from - 1
                if r < K:
                    for j in range(n):
                        samples[i, r, j] = z[j]
                for j in range(m):  # one logarithm per many steps: the stretches multiplied meanwhile
                    stretch[j] *= norms[j]
                    if not 1e-100 < stretch[j] < 1e100:
                        sums[i, j] += math.log(stretch[j])
                        stretch[j] = 1.0
                sums[i, m] += 1.0
        for j in range(m):
            sums[i, j] += math.log(stretch[j])
        codes[i] = code
        reached[i] = k
        for r in range(max(0, k - keep_from), K):  # iterates never reached
            for j in range(n):
                samples[i, r, j] = math.nan
    return 0
