"""Iterated maps u[k+1] = f(k, u[k]): the orbit loop.

The model's kernel ``f`` (here: the map) comes in as an argument, as in ``explicit_rk.py``.
"""

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, state_code
from orbitdesk.engine.jitting import loop


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
