"""The map member loop (``maps.members_iterate``) on rows the caller keeps: each member's state with its
tangent vectors, z = (u, V), carried from one call to the next, so a spectrum can be averaged block after
block until it settles (``analyses/lyapunov.map_exponents``) with every member's V going on where it
stopped. (``drivers.members_iterate`` starts its members from states and one shared V.)"""

from __future__ import annotations

import numpy as np

from orbitdesk.engine.drivers import BLOCK_MEMBERS, MEMBER_PAUSE_STEPS
from orbitdesk.engine.explicit_rk import PAUSED


def iterate_rows(engine, n0, n_end, keep_from, Z, rows, m, bound=1e10, report=None, samples=0):
    """Iterate the members' rows Z (N x n(m+1), C-contiguous, in place) from step n0 to ``n_end`` with
    the parameter rows ``rows`` (1 or N rows), their m tangent vectors re-orthonormalised every step and
    the logarithms of the stretches after ``keep_from`` summed. Returns (codes (N,), steps reached (N,),
    sums (N, m + 1): the m sums and the steps they cover, the first ``samples`` states after ``keep_from``
    (N, samples, n)). ``report(fraction)`` is called at pauses (it raises Cancelled to stop)."""
    N, nz = Z.shape
    n = nz // (m + 1)
    out = np.empty((N, int(samples), n))
    codes, reached = np.zeros(N, dtype=np.int64), np.zeros(N, dtype=np.int64)
    sums = np.zeros((N, m + 1))
    B = max(1, min(N, BLOCK_MEMBERS))
    work = (np.zeros((nz, B)), np.zeros((rows.shape[1], B)), np.zeros((nz, B)), np.zeros(B),
            np.zeros(B, dtype=np.int64), np.ones((max(m, 1), B)), np.zeros(3 + B))
    total = max(1, N * (int(n_end) - int(n0)))
    while True:
        code = engine.loops.members_iterate(engine.batch, Z, rows, int(n0), int(n_end), int(keep_from), float(bound),
                                            out, codes, reached, int(m), sums, *work, MEMBER_PAUSE_STEPS * 8)
        if code != PAUSED:
            break
        if report is not None:
            BS, KS = work[-1], work[-3]
            flying = int(BS[0])
            report(min(1.0, (BS[2] * (int(n_end) - int(n0)) + float((KS[:flying] - int(n0)).sum())) / total))
    return codes, reached, sums, out
