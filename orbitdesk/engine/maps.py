"""Iterated maps u[k+1] = f(k, u[k]): the orbit loop, two nearby orbits renormalised (the largest
Lyapunov exponent without a Jacobian), and many members (starts and/or parameter sets) mapped
together by the batched kernel, with their iterates and tangent vectors (sweeps, exponent grids).

The model's kernel ``f`` (here: the map; for members the batched ``g``) comes in as an argument, as
in ``explicit_rk.py``.
"""

import math

import numpy as np

from orbitdesk.engine.explicit_rk import PAUSED, any_layout, state_code
from orbitdesk.engine.jitting import at, loop, noref, numpy_version
from orbitdesk.engine.members import load_member
from orbitdesk.engine.members_numpy import state_codes
from orbitdesk.engine.tangent import SMALL_BLOCK, _gram_schmidt_block_numpy, _record, gram_schmidt_block, pull_back

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
    their separation (``tangent.pull_back``, Benettin et al. 1976). st[2]: the steps whose growth st[1] holds, st[3] the
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
            growth = pull_back(a, b, d0)
            if growth != growth:
                code = MERGED
                break
            st[1] += growth
            st[2] = done
            st[3] += 1.0
            if int(st[3]) % stride == 0 or k == n_end:
                _record(st[1:2], st[2], rows, row_t, st, float(k))
    st[0] = k
    return PAUSED if code == 0 and k < n_end else code


def _judge_iterates_numpy(NXT, n, m, count, bound, KS, keep_from, CODES, NORMS):
    if count <= SMALL_BLOCK:
        return _judge_iterates(NXT, n, m, count, bound, KS, keep_from, CODES, NORMS)
    CODES[:count] = state_codes(NXT[:n, :count], bound)
    if m > 0 and _gram_schmidt_block_numpy(NXT, n, n, m, NORMS, count):
        for c in np.flatnonzero(NORMS[0, :count] == 0.0):
            _collapsed(NXT, n, m, c, KS, keep_from, CODES)


@numpy_version(_judge_iterates_numpy)
@noref
def _judge_iterates(NXT, n, m, count, bound, KS, keep_from, CODES, NORMS):
    """Each new iterate's status code into CODES (``state_code``), and with m tangent vectors their
    re-orthonormalisation for the whole block (``gram_schmidt_block``, the stretches into NORMS)."""
    for c in range(count):
        CODES[c] = state_code(NXT[:n, c], bound)
    if m > 0 and gram_schmidt_block(NXT, n, n, m, NORMS, count):
        for c in range(count):
            if NORMS[0, c] == 0.0:
                _collapsed(NXT, n, m, c, KS, keep_from, CODES)


@noref
def _collapsed(NXT, n, m, c, KS, keep_from, CODES):
    """Member c's tangent vectors collapsed (the Jacobian is singular on its orbit): an undefined
    exponent after the transient; within it (a start that lands on a critical point) afresh."""
    if KS[c] + 1 > keep_from:
        if CODES[c] == 0:
            CODES[c] = 2
    else:
        for a in range(n):
            for b in range(m):
                NXT[n + a * m + b, c] = 1.0 if a == b else 0.0


def _take_iterates_numpy(Z, NXT, KS, BS, samples, STR, NORMS, sums, CODES, count, n, m, keep_from):
    if count <= SMALL_BLOCK:
        return _take_iterates(Z, NXT, KS, BS, samples, STR, NORMS, sums, CODES, count, n, m, keep_from)
    live = CODES[:count] == 0
    if live.all():  # the usual round: whole slices
        cols = np.arange(count)
        Z[:, :count] = NXT[:, :count]
        KS[:count] += 1
    else:
        cols = np.flatnonzero(live)
        Z[:, cols] = NXT[:, cols]
        KS[cols] += 1
    after = cols[KS[cols] > keep_from]
    if after.size == 0:
        return
    who = BS[3 + after].astype(np.int64)
    if samples.shape[1]:
        r = KS[after] - keep_from - 1
        kept = r < samples.shape[1]
        samples[who[kept], r[kept], :] = Z[:n, after[kept]].T
    for j in range(m):  # one logarithm per many steps: the stretches multiplied meanwhile
        stretch = STR[j, after] * NORMS[j, after]
        STR[j, after] = stretch
        wide = ~((1e-100 < stretch) & (stretch < 1e100))
        if wide.any():
            for c in after[wide].tolist():
                sums[int(BS[3 + c]), j] += math.log(STR[j, c])
                STR[j, c] = 1.0
    sums[who, m] += 1.0


@numpy_version(_take_iterates_numpy)
@noref
def _take_iterates(Z, NXT, KS, BS, samples, STR, NORMS, sums, CODES, count, n, m, keep_from):
    """The members whose new iterate is good take it (CODES[c] == 0): step KS[c] + 1, its sample
    after ``keep_from``, its stretches multiplied in and the logarithms summed."""
    K = samples.shape[1]
    nz = Z.shape[0]
    for c in range(count):
        if CODES[c] != 0:
            continue
        i = int(BS[3 + c])
        for j in range(nz):
            Z[j, c] = NXT[j, c]
        k = KS[c] + 1
        KS[c] = k
        if k > keep_from:
            r = k - keep_from - 1
            if r < K:
                for j in range(n):
                    samples[i, r, j] = Z[j, c]
            for j in range(m):  # one logarithm per many steps: the stretches multiplied meanwhile
                STR[j, c] *= NORMS[j, c]
                if not 1e-100 < STR[j, c] < 1e100:
                    sums[i, j] += math.log(STR[j, c])
                    STR[j, c] = 1.0
            sums[i, m] += 1.0


def _ending_numpy(CODES, KS, n_end, count):
    return int(np.count_nonzero((CODES[:count] != 0) | (KS[:count] >= n_end)))


@numpy_version(_ending_numpy)
@noref
def _ending(CODES, KS, n_end, count):
    """How many members of the block stop after this iterate (a status code, or the last step)."""
    ending = 0
    for c in range(count):
        if CODES[c] != 0 or KS[c] >= n_end:
            ending += 1
    return ending


def _step_times_numpy(TS, KS, count):
    TS[:count] = KS[:count]


@numpy_version(_step_times_numpy)
@noref
def _step_times(TS, KS, count):
    for c in range(count):
        TS[c] = float(KS[c])


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
    member-steps (the next call goes on). Each iterate is a few passes over the whole block (status,
    Gram-Schmidt, taking the new iterates: numpy over the members in plain Python); only members that
    stop are looked at one by one."""
    N, nz = U.shape
    n = nz // (m + 1)
    B = Z.shape[1]
    CODES = np.zeros(B, dtype=np.int64)
    NORMS = np.ones((max(m, 1), B))
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
        _step_times(TS, KS, count)
        g(m, TS, Z, Pb, NXT, count)
        used += count
        _judge_iterates(NXT, n, m, count, bound, KS, keep_from, CODES, NORMS)
        _take_iterates(Z, NXT, KS, BS, samples, STR, NORMS, sums, CODES, count, n, m, keep_from)
        if _ending(CODES, KS, n_end, count) == 0:
            continue
        c = count - 1  # from the last column down: the column moved into an ended one's is done already
        while c >= 0:
            if CODES[c] == 0 and KS[c] < n_end:
                c -= 1
                continue
            # member i ends: its state, status and the samples it never reached
            i = int(BS[3 + c])
            k = KS[c]
            for j in range(m):
                sums[i, j] += math.log(STR[j, c])
            codes[i] = CODES[c]
            reached[i] = k
            for j in range(nz):
                U[i, j] = Z[j, c]
            for r in range(max(0, k - keep_from), K):
                for j in range(n):
                    samples[i, r, j] = math.nan
            BS[2] += 1
            last = count - 1  # the last column moves into this one
            if last != c:
                for j in range(nz):
                    Z[j, c] = Z[j, last]
                for j in range(Pb.shape[0]):
                    Pb[j, c] = Pb[j, last]
                for j in range(m):
                    STR[j, c] = STR[j, last]
                KS[c] = KS[last]
                CODES[c] = CODES[last]
                BS[3 + c] = BS[3 + last]
            count -= 1
            c -= 1
        BS[0] = count
