"""Iterated maps u[k+1] = f(k, u[k]): the orbit loop, two nearby orbits renormalised (the largest
Lyapunov exponent without a Jacobian), and many members (starts and/or parameter sets) mapped
together by the batched kernel, with their iterates and tangent vectors (sweeps, exponent grids).

The model's kernel ``f`` (here: the map; for members the batched ``g``) comes in as an argument, as
in ``explicit_rk.py``.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, any_layout, state_code
from orbitdesk.engine.jitting import at, loop
from orbitdesk.engine.members import load_member
from orbitdesk.engine.tangent import _record, gram_schmidt

MERGED = -2  # map_pair: the two orbits met (no separation left to measure), a code of this loop only


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
        f(0, float(k), at(y), at(p), at(nxt))
        code = state_code(any_layout(nxt), bound)
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
def map_pair(f, a, b, p, st, n_end, keep_from, d0, every, bound, rows, row_t, stride, max_steps):
    """The reference orbit ``a`` and its companion ``b`` (in place) from step st[0] to ``n_end``
    (before ``keep_from`` only ``a`` is iterated; at ``keep_from`` b starts d0 away from it along
    ``b``'s entries as a direction): every ``every`` steps after ``keep_from``, and at the end, the
    logarithm of their distance over ``d0`` is added to st[1] and b pulled back to distance d0 along
    their separation (Benettin et al. 1976). st[2]: the steps whose growth st[1] holds, st[3] the
    renormalisations; running estimates st[1] / st[2] into ``rows`` every ``stride`` renormalisations
    (st[9] rows written). Returns a status code (1: an orbit escapes, 2: an undefined value, MERGED:
    the two orbits met) or PAUSED after ``max_steps`` steps (the next call goes on)."""
    n = a.shape[0]
    na = np.empty(n)
    nb = np.empty(n)
    k = int(st[0])
    code = 0
    for _ in range(min(max_steps, n_end - k)):
        if k == keep_from and st[4] == 0.0:  # the companion starts d0 away along the direction it holds
            for i in range(n):
                b[i] = a[i] + d0 * b[i]
            st[4] = 1.0
        paired = k >= keep_from  # before: the transient, the reference orbit alone
        f(0, float(k), at(a), at(p), at(na))
        code = state_code(any_layout(na), bound)
        if paired:
            f(0, float(k), at(b), at(p), at(nb))
            if code == 0:
                code = state_code(any_layout(nb), bound)
        if code != 0:
            break
        for i in range(n):
            a[i] = na[i]
            if paired:
                b[i] = nb[i]
        k += 1
        if not paired:
            continue
        done = k - keep_from
        if done % every == 0 or k == n_end:
            dist = 0.0
            for i in range(n):
                dist += (b[i] - a[i]) ** 2
            dist = math.sqrt(dist)
            if not dist > 0.0:
                code = MERGED
                break
            st[1] += math.log(dist / d0)
            st[2] = done
            st[3] += 1.0
            for i in range(n):
                b[i] = a[i] + d0 * (b[i] - a[i]) / dist
            if int(st[3]) % stride == 0 or k == n_end:
                _record(st[1:2], st[2], rows, row_t, st, float(k))
    st[0] = k
    return PAUSED if code == 0 and k < n_end else code


@loop
def members_iterate(g, U, P, n0, n_end, keep_from, bound, samples, codes, reached, m, sums, Z, Pb, NXT, TS, KS,
                    STR, BS, max_steps):
    """Iterate every row of U (N x n(m+1), in place) from step n0 to ``n_end`` with the parameters
    P[i] (or P[0] for all), up to B = Z.shape[1] members at a time (columns of Z (nz, B), Pb, NXT;
    each member's step in KS, its index in BS[3:], BS = [in flight, next to start, finished, ...]):
    one call of the batched kernel maps them all. The iterates after step ``keep_from`` go to
    ``samples[i]`` (the first K). With m tangent vectors (z = (u, V), the kernel's ``which = m``) V
    is re-orthonormalised every step and the logarithms after ``keep_from`` summed into
    ``sums[i, :m]`` (``sums[i, m]`` counts the steps). ``codes``, ``reached``: per member status code
    and the step reached. Returns 0 when all are done, or PAUSED after about ``max_steps``
    member-steps (the next call goes on)."""
    N, nz = U.shape
    n = nz // (m + 1)
    B = Z.shape[1]
    W = np.empty((n, max(m, 1)))
    norms = np.empty(max(m, 1))
    K = samples.shape[1]
    if n_end <= n0:  # nothing to iterate
        for i in range(N):
            codes[i] = 0
            reached[i] = n0
            for r in range(max(0, n0 - keep_from), K):
                for j in range(n):
                    samples[i, r, j] = math.nan
        return 0
    count = int(BS[0])
    used = 0
    while True:
        while count < B and BS[1] < N:  # free columns take the members waiting
            i = int(BS[1])
            BS[1] += 1
            load_member(U, P, i, Z, Pb, count)
            KS[count] = n0
            BS[3 + count] = i
            for j in range(m):
                STR[j, count] = 1.0
            count += 1
        BS[0] = count
        if count == 0:
            return 0
        if used >= max_steps:
            return PAUSED
        for c in range(count):
            TS[c] = float(KS[c])
        g(m, TS, Z, Pb, NXT, count)
        used += count
        c = np.int64(0)  # not a literal: callees get one compiled version
        while c < count:
            i = int(BS[3 + c])
            k = KS[c]
            code = state_code(NXT[:n, c], bound)
            if code == 0 and m > 0:
                for a in range(n):
                    for b in range(m):
                        W[a, b] = NXT[n + a * m + b, c]
                if not gram_schmidt(W, norms):  # the Jacobian is singular on the orbit
                    if k + 1 > keep_from:
                        code = 2
                    else:  # within the transient (a start that lands on a critical point): afresh
                        for a in range(n):
                            for b in range(m):
                                W[a, b] = 1.0 if a == b else 0.0
                if code == 0:
                    for a in range(n):
                        for b in range(m):
                            NXT[n + a * m + b, c] = W[a, b]
            if code == 0:
                for j in range(nz):
                    Z[j, c] = NXT[j, c]
                k += 1
                KS[c] = k
                if k > keep_from:
                    r = k - keep_from - 1
                    if r < K:
                        for j in range(n):
                            samples[i, r, j] = Z[j, c]
                    for j in range(m):  # one logarithm per many steps: the stretches multiplied meanwhile
                        STR[j, c] *= norms[j]
                        if not 1e-100 < STR[j, c] < 1e100:
                            sums[i, j] += math.log(STR[j, c])
                            STR[j, c] = 1.0
                    sums[i, m] += 1.0
                if k < n_end:
                    c += 1
                    continue
            # member i ends: its state, status and the samples it never reached
            for j in range(m):
                sums[i, j] += math.log(STR[j, c])
            codes[i] = code
            reached[i] = k
            for j in range(nz):
                U[i, j] = Z[j, c]
            for r in range(max(0, k - keep_from), K):
                for j in range(n):
                    samples[i, r, j] = math.nan
            BS[2] += 1
            last = count - 1  # the last column moves into this one (not yet looked at this round)
            if last != c:
                for j in range(nz):
                    Z[j, c] = Z[j, last]
                    NXT[j, c] = NXT[j, last]
                for j in range(Pb.shape[0]):
                    Pb[j, c] = Pb[j, last]
                for j in range(m):
                    STR[j, c] = STR[j, last]
                KS[c] = KS[last]
                BS[3 + c] = BS[3 + last]
            count -= 1
        BS[0] = count
