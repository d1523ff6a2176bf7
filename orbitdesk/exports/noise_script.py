"""The standalone script of a model with noise: it reproduces the realisations of ``orbitdesk run``
(Euler-Maruyama or Milstein, the same fixed step, the same seed) with numpy alone and writes the
columns of ``orbitdesk run --csv``: time, the first realisation, each state's mean and standard deviation.

The drift, the diffusion and Milstein's derivative terms are printed by ``codegen.scalar_function``
from the same expression list the engine's kernel is printed from, so the arithmetic is the engine's;
the increments come from ``numpy.random.default_rng`` seeded by child r of ``SeedSequence(SEED)`` for
realisation r, drawn in step order, as ``engine/stochastic.py`` draws them. User text reaches the
script only through ``run_script``'s escaping (comments reduced to printable ASCII, ``ascii()`` literals).
"""

from __future__ import annotations

from orbitdesk.engine.settings import SCHEMES, RunSettings
from orbitdesk.engine.stochastic import SCHEME_CODES
from orbitdesk.system.codegen import noise_terms, scalar_function


def noise_script_parts(system, settings: RunSettings, u0, p) -> list[str]:
    """The constants, the generated functions and the loop of the script (after ``run_script``'s head)."""
    G, L, commutative = noise_terms(system)
    milstein = SCHEME_CODES[settings.scheme] == 1
    f = system.plain(system.f)
    terms = f + G + (L if milstein else [])
    constants = "\n".join([
        f"SCHEME = {settings.scheme!a}  # {SCHEMES[settings.scheme]}",
        f"SEED = {int(settings.seed)!r}",
        f"REALISATIONS = {int(settings.realisations)!r}",
        f"N_NOISE = {len(system.noise_sources)!r}  # noise sources: {', '.join(ascii(s)[1:-1] for s in system.noise_sources)}",
        f"DT = {float(settings.dt)!r}  # the longest fixed step",
        f"T_START = {float(settings.t_start)!r}",
        f"T_END = {float(settings.t_end)!r}",
        f"SAMPLES = {int(settings.samples)!r}",
        f"TRANSIENT = {float(settings.transient)!r}",
        f"BOUND = {float(settings.bound)!r}  # a realisation passing this in size has blown up",
        f"COMMUTATIVE = {commutative!r}  # False: Milstein's order falls to 1/2 (no Levy areas)",
    ])
    return [constants, scalar_function(system, "terms", terms), _LOOP]


_LOOP = '''def step_grid():
    """(h, total steps, sample step numbers): the run's span in equal steps no longer than DT."""
    span = T_END - T_START
    total = max(1, int(math.ceil(span / DT - 1e-9)))
    h = span / total
    stride = 1 if SAMPLES <= 1 else max(1, int(math.ceil(total / (SAMPLES - 1))))
    kept = list(range(0, total + 1, stride))
    if kept[-1] != total:
        kept.append(total)
    return h, total, kept


def run():
    """Every realisation; returns the sample times and the states (realisation, state, time)."""
    p = list(PARAMETERS.values())
    n, m = len(STATES), N_NOISE
    h, total, kept = step_grid()
    wanted = set(kept)
    sqrt_h = math.sqrt(h)
    out = numpy.full((REALISATIONS, n, len(kept)), numpy.nan)
    for r, child in enumerate(numpy.random.SeedSequence(SEED).spawn(REALISATIONS)):
        dW = numpy.random.default_rng(child).standard_normal((total, m)) * sqrt_h
        y = [float(v) for v in INITIAL]
        out[r, :, 0] = y
        q = 1
        alive = True
        for g in range(total):
            if alive:
                w = [float(v) for v in dW[g]]
                try:
                    v = terms(T_START + g * h, y, p)
                except (ValueError, ZeroDivisionError, OverflowError):
                    v = [math.nan] * (n + n * m + n * m * m)  # undefined: this realisation ends, as in the engine
                incr = []
                for i in range(n):
                    d = v[i] * h
                    for j in range(m):
                        d += v[n + i * m + j] * w[j]
                    if SCHEME == "milstein":
                        for j in range(m):
                            for k in range(m):
                                c = 0.5 * w[j] * w[k]
                                if j == k:
                                    c -= 0.5 * h
                                d += v[n + n * m + (i * m + j) * m + k] * c
                    incr.append(d)
                y = [a + b for a, b in zip(y, incr)]
                if not all(abs(a) <= BOUND for a in y):
                    alive = False
                    y = [math.nan] * n
            if g + 1 in wanted:
                out[r, :, q] = y
                q += 1
    time = T_START + numpy.array(kept, dtype=float) * h
    if TRANSIENT > 0:
        keep = time >= T_START + TRANSIENT
        time, out = time[keep], out[:, :, keep]
    return time, out


def main(argv):
    output = argv[1] if len(argv) > 1 else __OUTPUT__
    time, out = run()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a time where every realisation blew up
        mean = numpy.nanmean(out, axis=0)
        std = numpy.nanstd(out, axis=0, ddof=1) if REALISATIONS > 1 else numpy.zeros_like(mean)
    columns = [time, *out[0], *mean, *std]
    with open(output, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["t", *STATES, *(s + "_mean" for s in STATES), *(s + "_std" for s in STATES)])
        writer.writerows(numpy.column_stack(columns).tolist())
    print(f"wrote {len(time)} rows ({REALISATIONS} realisations, seed {SEED}) to {output}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))'''


__all__ = ["noise_script_parts"]
