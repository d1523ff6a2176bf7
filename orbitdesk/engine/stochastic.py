"""Models with noise: realisations by Euler-Maruyama or Milstein's scheme, fixed step, from a seed.

The Ito equation dX = f(t, X) dt + G(t, X) dW (f the drift, G n x m, one column per noise source,
``language/noise.py``) is stepped with

* Euler-Maruyama: X += f h + G dW (strong order 1/2);
* Milstein: the same plus sum_jk (L^j g_k) I_jk with I_jj = (dW_j^2 - h)/2 and I_jk = dW_j dW_k / 2
  (j != k), L^j g_k = sum_l g_lj dg_k/dX_l from the generated code (``codegen.noise_terms``). With
  commuting sources (one source, additive noise, diagonal noise) this is Milstein's scheme with strong
  order 1 (Kloeden and Platen 1992, Numerical Solution of Stochastic Differential Equations, 10.3);
  with sources that do not commute the Levy areas are left out and the order is 1/2 (the run says so).

Reproducible: realisation r draws its increments from ``numpy.random.default_rng`` seeded by child r
of ``SeedSequence(seed)``, in step order, so realisation r is the same whatever the number of
realisations, the chunking, and in the exported script. The realisations run in one compiled loop
(``sde_advance``, the kernel as its one function argument), paused between chunks for progress and
cancel; a realisation that blows up stops (NaN from there), the others go on.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from orbitdesk.engine.jitting import loop

SDE_EULER, SDE_MILSTEIN = 0, 1
SCHEME_CODES = {"euler_maruyama": SDE_EULER, "milstein": SDE_MILSTEIN}
MAX_VALUES = 40_000_000  # realisations x states x samples kept
_CHUNK_DRAWS = 200_000  # random numbers drawn per chunk (all realisations)
WAIT_FOR_COMPILER = 3_000_000  # steps x realisations (x states / 3): about a minute of plain Python
PREPARE_FROM = 20_000  # ... from which the model's kernels are compiled in the background for later runs


@loop
def sde_advance(sde, scheme, t0, h, first, n_steps, stride, total, Y, p, dW, out, offset, bound, work, incr, codes):
    """Advance every row of Y (R x n, in place) by ``n_steps`` steps from global step ``first``.

    ``dW`` (R, n_steps, m): the Brownian increments; after global step g the state is written to
    ``out[r, offset + q]`` when g is a multiple of ``stride`` or the last step ``total`` (q counts those
    within this call; the whole ``out`` and an offset, not a slice of it, so the loop sees one array layout
    whatever the count of realisations and is compiled once). ``codes[r]``: 0 running, 1 blown up / not finite (that row is NaN from then on).
    Returns the number of samples written per row."""
    R, n = Y.shape
    m = dW.shape[2]
    nm = n * m
    written = 0
    for r in range(R):
        y = Y[r]
        q = 0
        for s in range(n_steps):
            g = first + s
            if codes[r] == 0:
                sde(scheme, t0 + g * h, y, p, work)
                for i in range(n):
                    d = work[i] * h
                    for j in range(m):
                        d += work[n + i * m + j] * dW[r, s, j]
                    if scheme == 1:
                        for j in range(m):
                            for k in range(m):
                                c = 0.5 * dW[r, s, j] * dW[r, s, k]
                                if j == k:
                                    c -= 0.5 * h
                                d += work[n + nm + (i * m + j) * m + k] * c
                    incr[i] = d
                for i in range(n):
                    y[i] += incr[i]
                    if not (abs(y[i]) <= bound):
                        codes[r] = 1
                if codes[r] != 0:
                    for i in range(n):
                        y[i] = np.nan
            if (g + 1) % stride == 0 or g + 1 == total:
                for i in range(n):
                    out[r, offset + q, i] = y[i]
                q += 1
        written = q
    return written


@dataclass
class Realisations:
    """Realisations of a model with noise on a common time grid."""

    time: np.ndarray  # (K,)
    states: np.ndarray  # (R, n, K); NaN after a realisation blew up
    state_names: list[str]
    sources: list[str]  # the noise sources as a person reads them
    seed: int
    scheme: str
    dt: float
    blown_up: int = 0
    notes: list[str] = field(default_factory=list)

    @property
    def count(self) -> int:
        return self.states.shape[0]

    @cached_property
    def mean(self) -> np.ndarray:
        """(n, K): the mean over the realisations still finite at each time."""
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a time where every realisation blew up: NaN
            return np.nanmean(self.states, axis=0)

    @cached_property
    def std(self) -> np.ndarray:
        """(n, K): the sample standard deviation (ddof 1) over the realisations, 0 with one."""
        if self.count < 2:
            return np.zeros(self.states.shape[1:])
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            return np.nanstd(self.states, axis=0, ddof=1)

    def series(self, name: str) -> np.ndarray:
        """(R, K): every realisation of one state."""
        return self.states[:, self.state_names.index(name), :]

    def to_dict(self) -> dict:
        """The ``run --json`` contract for models with noise (first realisation under ``states``)."""
        def listed(a):
            return [None if not math.isfinite(v) else float(v) for v in np.asarray(a, float)]

        return {"t": listed(self.time),
                "mean": {s: listed(self.mean[i]) for i, s in enumerate(self.state_names)},
                "std": {s: listed(self.std[i]) for i, s in enumerate(self.state_names)},
                "states": {s: listed(self.states[0, i]) for i, s in enumerate(self.state_names)},
                "realisations": self.count, "seed": self.seed, "scheme": self.scheme, "dt": self.dt,
                "noise_sources": list(self.sources), "blown_up": self.blown_up, "notes": list(self.notes)}


def step_grid(t0: float, t1: float, dt: float, samples: int) -> tuple[float, int, int, np.ndarray]:
    """(h, total steps, stride, kept): ``h`` divides [t0, t1] evenly and is at most ``dt``; a sample is
    kept every ``stride`` steps and after the last (about ``samples`` points, every step when
    ``samples`` <= 1); ``kept`` are the step numbers of the samples, 0 (the start) first."""
    span = t1 - t0
    total = max(1, int(math.ceil(span / dt - 1e-9)))
    h = span / total
    stride = 1 if samples <= 1 else max(1, int(math.ceil(total / (samples - 1))))
    kept = np.arange(0, total + 1, stride)
    if kept[-1] != total:
        kept = np.append(kept, total)
    return h, total, stride, kept


def increments(seed: int, realisations: int):
    """One generator per realisation: child r of SeedSequence(seed) (the exported script does the same)."""
    return [np.random.default_rng(child) for child in np.random.SeedSequence(int(seed)).spawn(int(realisations))]


def run_realisations(system, settings, u0, p, report=None, engine=None) -> Realisations:
    """Realisations of ``system`` (which has noise) over [t_start, t_end] with ``settings.dt``."""
    from orbitdesk.engine import compiled
    from orbitdesk.language.noise import source_label
    from orbitdesk.system.codegen import noise_terms

    t0, t1 = float(settings.t_start), float(settings.t_end)
    if t1 <= t0:
        raise ValueError("a model with noise runs forward in time: the end time must come after the start")
    n, m, R = system.n_states, len(system.noise_sources), int(settings.realisations)
    h, total, stride, kept = step_grid(t0, t1, float(settings.dt), int(settings.samples))
    K = kept.size
    if R * n * K > MAX_VALUES:
        raise ValueError(f"{R} realisations of {n} states at {K} times are more than {MAX_VALUES:,} values; "
                         "ask for fewer realisations or fewer samples")
    scheme = SCHEME_CODES[settings.scheme]
    _, _, commutative = noise_terms(system)
    notes = []
    if scheme == SDE_MILSTEIN and not commutative:
        notes.append("the noise sources do not commute (L^j g_k differs from L^k g_j), and the Levy areas "
                     "this would need are not simulated: Milstein's scheme converges with order 1/2 here")
    if engine is None:  # wait for the compiler only when plain Python would take longer than compiling
        work = R * total * (1 + n / 3)
        engine = compiled.engine_for(system, wait=work >= WAIT_FOR_COMPILER)
        if not engine.compiled and work >= PREPARE_FROM:
            compiled.prepare(system)  # in the background, for the runs after this one
    rngs = increments(settings.seed, R)
    Y = np.ascontiguousarray(np.tile(np.asarray(u0, dtype=float), (R, 1)))
    p = np.ascontiguousarray(p, dtype=float)
    out = np.empty((R, K, n))
    out[:, 0, :] = Y
    work = np.zeros(n + n * m + n * m * m)
    incr = np.zeros(n)
    codes = np.zeros(R, dtype=np.int64)
    chunk = max(stride, (max(1, _CHUNK_DRAWS // max(1, R * m)) // stride) * stride)
    sqrt_h = math.sqrt(h)
    first, q = 0, 1
    with np.errstate(all="ignore"):
        while first < total:
            steps = min(chunk, total - first)
            dW = np.empty((R, steps, m))
            for r in range(R):
                dW[r] = rngs[r].standard_normal((steps, m)) * sqrt_h
            written = engine.loops.sde_advance(engine.kernels.sde, scheme, t0, h, first, steps, stride, total, Y, p,
                                               dW, out, q, float(settings.bound), work, incr, codes)
            q += written
            first += steps
            if report is not None:
                report(first / total)
    time = t0 + kept[:q] * h
    states = np.ascontiguousarray(out[:, :q, :].transpose(0, 2, 1))
    blown = int(np.count_nonzero(codes))
    if blown:
        notes.append(f"{blown} of {R} realisations blew up (passed {settings.bound:g} or became undefined) and "
                     "end there; the mean and spread are over the others")
    if settings.transient > 0:
        keep = time >= t0 + settings.transient
        time, states = time[keep], states[:, :, keep]
    return Realisations(time, states, list(system.states), [source_label(s) for s in system.noise_sources],
                        int(settings.seed), settings.scheme, h, blown, notes)


def final_states(system, u0, p, t0: float, h: float, dW, scheme: str, bound: float = 1e10, engine=None):
    """(R, n): each realisation's state after the given Brownian increments ``dW`` (R, N, m), step ``h``
    (the loop of ``run_realisations`` on increments chosen by the caller: strong-order checks)."""
    from orbitdesk.engine import compiled

    dW = np.ascontiguousarray(dW, dtype=float)
    R, N, m = dW.shape
    n = system.n_states
    engine = engine or compiled.engine_for_work(system, R * N * (1 + n / 3))
    Y = np.ascontiguousarray(np.tile(np.asarray(u0, dtype=float), (R, 1)))
    out = np.empty((R, 1, n))
    codes = np.zeros(R, dtype=np.int64)
    with np.errstate(all="ignore"):
        engine.loops.sde_advance(engine.kernels.sde, SCHEME_CODES[scheme], float(t0), float(h), 0, N, N, N, Y,
                                 np.ascontiguousarray(p, dtype=float), dW, out, 0, float(bound),
                                 np.zeros(n + n * m + n * m * m), np.zeros(n), codes)
    return Y


def warm_up_sde(engine) -> None:
    """Compile ``sde_advance`` for a model with noise with the drivers' argument types."""
    k = engine.kernels
    n, m = int(k.N_STATES), int(k.N_NOISE)
    out = np.empty((1, 1, n))
    engine.loops.sde_advance(k.sde, 1, 0.0, 1e-9, 0, 1, 1, 1, np.full((1, n), 0.5), np.full(int(k.N_PARAMS), 0.5),
                             np.zeros((1, 1, m)), out, 0, 1e10, np.zeros(n + n * m + n * m * m),
                             np.zeros(n), np.zeros(1, dtype=np.int64))


def simulate_noise(system, settings, u0, p, report=None):
    """A run of a model with noise: a Trajectory of the first realisation carrying all of them."""
    from orbitdesk.engine.runs import Trajectory
    from orbitdesk.engine.status import CANCELLED, DIVERGED, OK
    from orbitdesk.engine.progress import Cancelled

    try:
        result = run_realisations(system, settings, u0, p, report)
    except Cancelled:
        return Trajectory("flow", np.array([settings.t_start]), np.asarray(u0, float)[:, None], list(system.states),
                          system.param_dict(p), CANCELLED, "cancelled")
    first = result.states[0]
    finite = np.all(np.isfinite(first), axis=0)
    status, message = OK, "; ".join(result.notes)
    if not finite.all():
        status = DIVERGED
        cut = int(np.argmin(finite))
        message = (f"the first realisation blows up near {system.time_name} = {result.time[cut]:.6g}"
                   + (f"; {message}" if message else ""))
    traj = Trajectory("flow", result.time, first, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(result.time, np.nan_to_num(first), p) if result.time.size else {},
                      steps_taken=int(round((result.time[-1] - settings.t_start) / result.dt)), realisations=result)
    return traj


__all__ = ["sde_advance", "Realisations", "run_realisations", "final_states", "simulate_noise", "step_grid", "increments",
           "SCHEME_CODES", "MAX_VALUES"]
