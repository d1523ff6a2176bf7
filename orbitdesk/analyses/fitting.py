"""Estimating parameters and initial values from measured data sets, with their uncertainty.

Weighted least squares (``scipy.optimize.least_squares``, trust-region reflective within bounds). The
Jacobian of the residuals comes from the forward sensitivity equations (core/sensitivity.py), never
from finite differences. Several data sets are fitted jointly: ``FitSettings.parameters`` are shared,
``FitSettings.local`` are estimated once per data set, and the initial values in
``FitSettings.initial`` always belong to each data set.

Multiple shooting (``multiple_shooting = K > 1``) cuts each record into K segments whose starting
states are extra unknowns (started at the data where a state is measured), with continuity residuals
joining the segments; this keeps long or oscillating records from falling into a wrong minimum. The
result is then polished by single shooting from there, so estimates and uncertainties are always
those of the plain least-squares problem.

Uncertainty, from the Jacobian J at the optimum (as scipy's ``curve_fit`` does by default):
covariance = s^2 (J^T J)^-1 with s^2 = (weighted sum of squares) / (N - P); 95 % intervals use the
t distribution with N - P degrees of freedom.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, stats

from orbitdesk.engine.model_events import describe_events
from orbitdesk.document.datasets import DataSet
from orbitdesk.engine.progress import CancelToken, Reporter
from orbitdesk.analyses.sensitivity import Observer, SensitivityFailure, Sensitivities
from orbitdesk.system.compiled_system import MAP, CompiledSystem

OK, NOT_CONVERGED = "ok", "not_converged"
CORRELATION_WARNING = 0.95
SINGULAR_RATIO = 1e-7   # smallest / largest singular value of the column-scaled Jacobian


class FitError(ValueError):
    """A fit that cannot be set up or started; the message is in plain words."""


@dataclass
class FitSettings:
    parameters: list[str] = field(default_factory=list)   # estimated, shared by all data sets
    initial: list[str] = field(default_factory=list)      # initial values estimated for each data set
    local: list[str] = field(default_factory=list)        # parameters estimated separately per data set
    bounds: dict[str, tuple] = field(default_factory=dict)  # NAME -> (lo, hi); default: the slider range
    weights: dict[str, float] = field(default_factory=dict)  # quantity -> weight (columns without sd)
    multiple_shooting: int = 1
    t_start: float = 0.0
    method: str = "dop853"
    rtol: float = 1e-9
    atol: float = 1e-11
    max_evaluations: int = 400
    tolerance: float = 1e-10     # ftol, xtol and gtol of least_squares


@dataclass
class Estimate:
    name: str                    # as shown: "k", or "k (run 2)" for a per-data-set value
    kind: str                    # "parameter" or "initial"
    target: str                  # the parameter or state name
    dataset: str | None          # None when shared by all data sets
    value: float
    start: float
    stderr: float | None = None
    interval: tuple[float, float] | None = None
    lower: float = -math.inf
    upper: float = math.inf

    def to_dict(self) -> dict:
        return {"value": self.value, "stderr": self.stderr,
                "interval": list(self.interval) if self.interval else None}


@dataclass
class FitResult:
    status: str
    message: str
    estimates: list[Estimate]
    correlation: np.ndarray
    residual_rms: dict[str, float]
    evaluations: int
    warnings: list[str]
    dof: int
    cost: float
    datasets: list[dict]          # per data set: name, parameters, initial, residual_rms (all by name)

    @property
    def parameters(self) -> list[Estimate]:
        return [e for e in self.estimates if e.kind == "parameter"]

    @property
    def initial(self) -> list[Estimate]:
        return [e for e in self.estimates if e.kind == "initial"]

    def shared_values(self) -> dict[str, float]:
        """Parameter values that can be applied to the model: the shared estimates."""
        return {e.target: e.value for e in self.parameters if e.dataset is None}

    def to_dict(self) -> dict:
        return {"parameters": {e.name: e.to_dict() for e in self.parameters},
                "initial": {e.name: e.to_dict() for e in self.initial},
                "residual_rms": dict(self.residual_rms),
                "correlation": [[float(v) for v in row] for row in self.correlation],
                "evaluations": int(self.evaluations),
                "warnings": list(self.warnings)}

    # project storage (the live document's result of kind "fit", document/results.py): plain numbers and text
    def to_saved(self) -> dict:
        return {"status": self.status, "message": self.message,
                "estimates": [{"name": e.name, "kind": e.kind, "target": e.target, "dataset": e.dataset,
                               "value": e.value, "start": e.start, "stderr": e.stderr,
                               "interval": list(e.interval) if e.interval else None,
                               "lower": e.lower if math.isfinite(e.lower) else None,
                               "upper": e.upper if math.isfinite(e.upper) else None} for e in self.estimates],
                "correlation": [[float(v) for v in row] for row in self.correlation],
                "residual_rms": dict(self.residual_rms), "evaluations": int(self.evaluations),
                "warnings": list(self.warnings), "dof": int(self.dof), "cost": float(self.cost),
                "datasets": [{k: v for k, v in d.items() if k != "model"} for d in self.datasets]}  # (curves: not kept)

    @classmethod
    def from_saved(cls, data: dict) -> "FitResult":
        """A FitResult from ``to_saved``'s form (numbers and text only; TypeError, KeyError or ValueError when
        it does not fit)."""
        def number(v, default=math.nan):
            return default if v is None else float(v)

        estimates = []
        for e in data["estimates"]:
            interval = e.get("interval")
            estimates.append(Estimate(str(e["name"]), str(e["kind"]), str(e["target"]),
                                      None if e.get("dataset") is None else str(e["dataset"]), number(e["value"]),
                                      number(e.get("start")), None if e.get("stderr") is None else float(e["stderr"]),
                                      (number(interval[0]), number(interval[1])) if interval else None,
                                      number(e.get("lower"), -math.inf), number(e.get("upper"), math.inf)))
        n = len(estimates)
        correlation = np.array([[number(v) for v in row] for row in data["correlation"]], dtype=float).reshape(n, n)
        datasets = data.get("datasets") or []
        if not all(isinstance(d, dict) and isinstance(d.get("name"), str) for d in datasets):
            raise ValueError("data sets without names")
        return cls(str(data["status"]), str(data["message"]), estimates, correlation,
                   {str(k): number(v) for k, v in data["residual_rms"].items()}, int(data["evaluations"]),
                   [str(w) for w in data.get("warnings") or []], int(data["dof"]), number(data["cost"]),
                   [dict(d) for d in datasets])


# ---------------------------------------------------------------- the problem

@dataclass
class _Unknown:
    kind: str            # "parameter", "initial" or "node"
    target: str
    dataset: int | None
    index: int           # parameter index or state index
    segment: int = 0


class _Problem:
    def __init__(self, system: CompiledSystem, datasets: list[DataSet], settings: FitSettings, p0, u0, ranges):
        self.system, self.datasets, self.settings = system, datasets, settings
        self.p0 = np.asarray(p0, dtype=float)
        self.u0 = np.asarray(u0, dtype=float)
        self.is_map = system.kind == MAP
        self._check(ranges)
        sel = sorted({system.parameters.index(n) for n in [*settings.parameters, *settings.local]})
        self.sens = Sensitivities(system, sel)
        self.position = {k: a for a, k in enumerate(sel)}
        self.unknowns: list[_Unknown] = [_Unknown("parameter", n, None, system.parameters.index(n))
                                         for n in settings.parameters]
        for d in range(len(datasets)):
            self.unknowns += [_Unknown("parameter", n, d, system.parameters.index(n)) for n in settings.local]
            self.unknowns += [_Unknown("initial", s, d, system.states.index(s)) for s in settings.initial]
        self.n_estimates = len(self.unknowns)
        self.observers = [Observer(system, ds.quantities()) for ds in datasets]
        self.segments = [self._segments(ds) for ds in datasets]
        self.evaluations = 0

    def _check(self, ranges):
        s, system = self.settings, self.system
        if not (s.parameters or s.local or s.initial):
            raise FitError("nothing to estimate: choose at least one parameter or initial value")
        for n in [*s.parameters, *s.local]:
            if n not in system.parameters:
                raise FitError(f"'{n}' is not a parameter of the model (parameters: {', '.join(system.parameters) or 'none'})")
        both = set(s.parameters) & set(s.local)
        if both:
            raise FitError(f"{', '.join(sorted(both))} cannot be both shared and per data set")
        for n in s.initial:
            if n not in system.states:
                raise FitError(f"'{n}' is not a state of the model (states: {', '.join(system.states)})")
        if len({*s.parameters, *s.local}) != len(s.parameters) + len(s.local) or len(set(s.initial)) != len(s.initial):
            raise FitError("a name is listed twice among the values to estimate")
        if not self.datasets:
            raise FitError("no data set to fit")
        names = [*system.states, *system.derived_names]
        for ds in self.datasets:
            missing = ds.unmatched(names)
            if missing:
                raise FitError(f"data set '{ds.name}': column {', '.join(repr(m) for m in missing)} is not a state or "
                               f"derived quantity of the model (map it to one of: {', '.join(names)})")
            if self.is_map:
                if np.any(ds.time != np.round(ds.time)) or ds.time[0] < 0:
                    raise FitError(f"data set '{ds.name}': the steps of a map must be whole numbers n >= 0")
            elif ds.time[0] < s.t_start:
                raise FitError(f"data set '{ds.name}' starts at {ds.time[0]:g}, before the model's start time "
                               f"{s.t_start:g}")
        if s.multiple_shooting < 1:
            raise FitError("the number of shooting segments must be at least 1")
        self.ranges = ranges

    def _segments(self, ds: DataSet) -> list[np.ndarray]:
        k = max(1, min(int(self.settings.multiple_shooting), ds.n_samples // 2 or 1))
        return [c for c in np.array_split(np.arange(ds.n_samples), k) if c.size]

    # -------------------------------------------------------- layout of the unknown vector
    def add_nodes(self, x0: list[float]) -> list[float]:
        """Append the shooting nodes' unknowns (segments after the first) with starting guesses."""
        system = self.system
        x = list(x0)
        for d, (ds, segs) in enumerate(zip(self.datasets, self.segments)):
            if len(segs) < 2:
                continue
            node_times = np.array([ds.time[c[0]] for c in segs[1:]])
            try:
                p, u = self.values_for(d, np.array(x))
                guess = self.sens.run(u, p, self._t0(), node_times, rtol=1e-6, atol=1e-8,
                                      method=self.settings.method).states
            except SensitivityFailure:
                guess = np.repeat(self.values_for(d, np.array(x))[1][:, None], node_times.size, axis=1)
            for s, c in enumerate(segs[1:], start=1):
                for i, state in enumerate(system.states):
                    col = ds.column(state)
                    value = col.values[c[0]] if col is not None else guess[i, s - 1]
                    self.unknowns.append(_Unknown("node", state, d, i, s))
                    x.append(float(value))
        return x

    def drop_nodes(self) -> None:
        self.unknowns = self.unknowns[:self.n_estimates]
        self.segments = [[np.arange(ds.n_samples)] for ds in self.datasets]

    def _t0(self) -> float:
        return 0.0 if self.is_map else float(self.settings.t_start)

    def start_vector(self) -> np.ndarray:
        out = []
        for u in self.unknowns[:self.n_estimates]:
            if u.kind == "parameter":
                base = self.datasets[u.dataset].parameters if u.dataset is not None else {}
                out.append(float(base.get(u.target, self.p0[u.index])))
            else:
                out.append(float(self.datasets[u.dataset].initial.get(u.target, self.u0[u.index])))
        return np.array(out)

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        lo, hi = [], []
        for u in self.unknowns:
            b = self.settings.bounds.get(u.target)
            if b is None and u.kind == "parameter":
                b = self.ranges.get(u.target)
            b = b or (None, None)
            lo.append(-np.inf if b[0] is None else float(b[0]))
            hi.append(np.inf if b[1] is None else float(b[1]))
        return np.array(lo), np.array(hi)

    def values_for(self, d: int, x) -> tuple[np.ndarray, np.ndarray]:
        """Parameter and initial vectors of data set ``d`` at unknowns ``x``."""
        system, ds = self.system, self.datasets[d]
        p = self.p0.copy()
        for k, v in ds.parameters.items():
            if k in system.parameters:
                p[system.parameters.index(k)] = v
        u0 = self.u0.copy()
        for k, v in ds.initial.items():
            if k in system.states:
                u0[system.states.index(k)] = v
        for j, u in enumerate(self.unknowns[:self.n_estimates]):
            if u.dataset is None or u.dataset == d:
                (p if u.kind == "parameter" else u0)[u.index] = x[j]
        return p, u0

    # -------------------------------------------------------- residuals and Jacobian
    def weights(self, ds: DataSet, q: str) -> np.ndarray:
        col = ds.column(q)
        if col.sd is not None:
            return 1.0 / col.sd
        return np.full(ds.n_samples, float(self.settings.weights.get(q, self.settings.weights.get(col.name,
                                                                                                  col.weight))))

    def evaluate(self, x, cancel=None, with_jacobian=True):
        """(residuals, Jacobian, model values per data set {quantity: values})."""
        self.evaluations += 1
        system, n = self.system, self.system.n_states
        index = {(u.kind, u.dataset, u.index, u.segment): j for j, u in enumerate(self.unknowns)}
        rows, jrows, predicted = [], [], []
        P = len(self.unknowns)
        for d, (ds, segs) in enumerate(zip(self.datasets, self.segments)):
            if cancel is not None:
                cancel.check()
            p, u0 = self.values_for(d, x)
            model = {q: np.empty(ds.n_samples) for q in ds.quantities()}
            for s, c in enumerate(segs):
                if s == 0:
                    t_a, start = self._t0(), u0
                else:
                    t_a = float(ds.time[c[0]])
                    start = np.array([x[index[("node", d, i, s)]] for i in range(n)])
                times = ds.time[c]
                if s + 1 < len(segs):
                    times = np.append(times, ds.time[segs[s + 1][0]])
                run = self.sens.run(start, p, t_a, times, rtol=self.settings.rtol, atol=self.settings.atol,
                                    method=self.settings.method, cancel=cancel)
                k = c.size
                # which unknowns move this segment's start: initial values (segment 0) or its node
                start_cols = [(index.get(("initial", d, i, 0)) if s == 0 else index[("node", d, i, s)], i)
                              for i in range(n)]
                param_cols = [(j, u.index) for j, u in enumerate(self.unknowns)
                              if u.kind == "parameter" and (u.dataset is None or u.dataset == d)]
                for q in ds.quantities():
                    h, dh_du, dh_dp = self.observers[d].observe(q, run, p)
                    w = self.weights(ds, q)[c]
                    col = ds.column(q)
                    model[q][c] = h[:k]
                    rows.append(w * (h[:k] - col.values[c]))
                    if with_jacobian:
                        block = np.zeros((k, P))
                        for j, pk in param_cols:
                            block[:, j] = np.einsum("it,it->t", dh_du[:, :k], run.dparams[:, self.sens_pos(pk), :k]) \
                                + dh_dp[pk, :k]
                        for j, i in start_cols:
                            if j is not None:
                                block[:, j] = np.einsum("it,it->t", dh_du[:, :k], run.dstart[:, i, :k])
                        jrows.append(w[:, None] * block)
                if s + 1 < len(segs):  # continuity with the next segment's starting state
                    wc = self.continuity_weights(ds)
                    end = run.states[:, -1]
                    node = np.array([x[index[("node", d, i, s + 1)]] for i in range(n)])
                    rows.append(wc * (end - node))
                    if with_jacobian:
                        block = np.zeros((n, P))
                        for j, pk in param_cols:
                            block[:, j] = run.dparams[:, self.sens_pos(pk), -1]
                        for j, i in start_cols:
                            if j is not None:
                                block[:, j] = run.dstart[:, i, -1]
                        for i in range(n):
                            block[i, index[("node", d, i, s + 1)]] = -1.0
                        jrows.append(wc[:, None] * block)
            predicted.append(model)
        r = np.concatenate(rows)
        J = np.vstack(jrows) if with_jacobian else None
        return r, J, predicted

    def sens_pos(self, pk: int) -> int:
        return self.position[pk]

    def continuity_weights(self, ds: DataSet) -> np.ndarray:
        scale = []
        typical = max(float(np.mean(self.weights(ds, q))) for q in ds.quantities())
        for state in self.system.states:
            col = ds.column(state)
            scale.append(float(np.mean(self.weights(ds, state))) if col is not None else typical)
        return 10.0 * np.array(scale)


# ---------------------------------------------------------------- driver

def fit(system: CompiledSystem, datasets: list[DataSet], settings: FitSettings, p0=None, u0=None,
        ranges: dict | None = None, cancel: CancelToken | None = None, progress=None) -> FitResult:
    """Estimate ``settings.parameters``/``local``/``initial`` from ``datasets``; see the module docstring.

    ``p0``/``u0`` are the starting parameter and initial vectors (default: the model's); ``ranges``
    maps parameter names to (lo, hi) bounds (default: the model's slider ranges)."""
    system.refuse_delays("fitting to data")
    if getattr(system.model, "events", None):
        raise ValueError("fitting a model with events is not offered yet: the fit's sensitivities (du/dp) jump "
                         "at each event by the saltation matrix, which it does not apply; the model's events: "
                         f"{describe_events(system)}")
    p0 = system.param_values.copy() if p0 is None else np.asarray(p0, dtype=float)
    u0 = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    ranges = dict(system.param_ranges if ranges is None else ranges)
    problem = _Problem(system, datasets, settings, p0, u0, ranges)
    report = Reporter(progress, cancel)
    x0 = problem.start_vector()
    lo, hi = problem.bounds()
    bad = [u.target for u, a, l, h in zip(problem.unknowns, x0, lo, hi) if not l <= a <= h]
    x0 = np.clip(x0, lo, hi)
    notes = [f"the starting value of {name} lay outside its range and was moved to the nearest bound"
             for name in bad]
    budget = max(int(settings.max_evaluations), 2)
    if any(len(s) > 1 for s in problem.segments):
        x_ms = np.array(problem.add_nodes(list(x0)))
        lo_ms, hi_ms = problem.bounds()
        first = _solve(problem, x_ms, lo_ms, hi_ms, settings, cancel, report.part(0.0, 0.6), budget)
        x0 = np.clip(first.x[:problem.n_estimates], lo, hi)
        problem.drop_nodes()
        report = report.part(0.6, 0.4)
    res = _solve(problem, x0, lo, hi, settings, cancel, report, budget)
    r, J, predicted = problem.evaluate(res.x, cancel)
    return _result(problem, res, r, J, predicted, lo, hi, notes)


def _solve(problem: _Problem, x0, lo, hi, settings, cancel, report, budget):
    cache = {}
    first = [True]
    size = [1.0, 0]     # largest residual at the start, number of residuals

    def evaluate(x):
        report(min(problem.evaluations / budget, 0.99))
        key = x.tobytes()
        if key not in cache:
            cache.clear()
            try:
                r, J, _ = problem.evaluate(x, cancel)
            except SensitivityFailure as e:
                if first[0]:
                    raise FitError(f"the model cannot be run at the starting values: {e}") from None
                # a failed trial step: a large residual makes least_squares reject it and shrink its step
                r = np.full(size[1], 1e6 * size[0])
                J = np.zeros((size[1], x.size))
            else:
                if first[0]:
                    size[:] = [max(1.0, float(np.max(np.abs(r)))), r.size]
            first[0] = False
            cache[key] = (r, J)
        return cache[key]

    tol = settings.tolerance
    return optimize.least_squares(lambda x: evaluate(x)[0], x0, jac=lambda x: evaluate(x)[1], bounds=(lo, hi),
                                  method="trf", x_scale="jac", ftol=tol, xtol=tol, gtol=tol, max_nfev=budget)


def _result(problem: _Problem, res, r, J, predicted, lo, hi, notes) -> FitResult:
    names = _display_names(problem)
    x = res.x
    N, P = r.size, x.size
    dof = N - P
    cost = float(r @ r)
    warnings = list(notes)
    if res.status == 0:
        warnings.append(f"the fit stopped after {res.nfev} evaluations before it converged; the estimates are "
                        "not final (allow more evaluations or start closer)")
    stderr = np.full(P, np.nan)
    corr = np.full((P, P), np.nan)
    norms = np.linalg.norm(J, axis=0)
    for j in np.flatnonzero(norms == 0):
        warnings.append(f"the data do not depend on {names[j]} at all: it cannot be estimated from them")
    if dof <= 0:
        warnings.append(f"there are {N} data values for {P} unknowns: no uncertainty can be given "
                        "(more data or fewer unknowns are needed)")
    else:
        safe = np.where(norms > 0, norms, 1.0)
        U, sv, Vt = np.linalg.svd(J / safe, full_matrices=False)
        if sv[-1] < SINGULAR_RATIO * sv[0] and not np.any(norms == 0):
            v = Vt[-1]
            top = [names[k] for k in np.argsort(-np.abs(v))[:2]]
            warnings.append(f"the Jacobian is nearly singular: the data hardly tell {top[0]} and {top[1]} apart "
                            "(one combination of them can change without changing the fit); fix one of them "
                            "or add data that separate them")
        keep = sv > sv[0] * max(N, P) * np.finfo(float).eps
        inv = (Vt[keep].T / sv[keep] ** 2) @ Vt[keep]          # (J_s^T J_s)^+ in scaled units
        cov = (cost / dof) * inv / np.outer(safe, safe)
        diag = np.diag(cov).copy()
        stderr = np.sqrt(np.clip(diag, 0, None))
        stderr[norms == 0] = np.nan
        with np.errstate(all="ignore"):
            corr = cov / np.outer(stderr, stderr)
        np.fill_diagonal(corr, 1.0)
        corr[norms == 0, :] = np.nan
        corr[:, norms == 0] = np.nan
        for a in range(P):
            for b in range(a + 1, P):
                if np.isfinite(corr[a, b]) and abs(corr[a, b]) > CORRELATION_WARNING:
                    warnings.append(f"{names[a]} and {names[b]} are strongly correlated ({corr[a, b]:+.3f}): the data "
                                    "determine a combination of them better than each one")
    tq = float(stats.t.ppf(0.975, dof)) if dof > 0 else math.nan
    estimates = []
    for j, u in enumerate(problem.unknowns[:problem.n_estimates]):
        span = hi[j] - lo[j] if np.isfinite(hi[j] - lo[j]) else max(1.0, abs(x[j]))
        at = None
        if res.active_mask[j] < 0 or (np.isfinite(lo[j]) and x[j] - lo[j] <= 1e-6 * span):
            at = ("lower", lo[j])
        elif res.active_mask[j] > 0 or (np.isfinite(hi[j]) and hi[j] - x[j] <= 1e-6 * span):
            at = ("upper", hi[j])
        if at:
            warnings.append(f"{names[j]} ended at its {at[0]} bound {at[1]:g}: the data pull it further; widen "
                            "its range or fix it (its uncertainty is not meaningful)")
        se = float(stderr[j]) if np.isfinite(stderr[j]) else None
        estimates.append(Estimate(names[j], "initial" if u.kind == "initial" else "parameter", u.target,
                                  None if u.dataset is None else problem.datasets[u.dataset].name, float(x[j]),
                                  float(res.x[j]), se, (float(x[j] - tq * se), float(x[j] + tq * se))
                                  if se is not None and math.isfinite(tq) else None, float(lo[j]), float(hi[j])))
    residual_rms, per_dataset = _residual_rms(problem, x, predicted)
    message = "converged" if res.status > 0 else "stopped before converging"
    corr_list = np.where(np.isfinite(corr), corr, np.nan)
    return FitResult(OK if res.status > 0 else NOT_CONVERGED, message, estimates, corr_list, residual_rms,
                     problem.evaluations, warnings, dof, cost, per_dataset)


def _display_names(problem: _Problem) -> list[str]:
    several = len(problem.datasets) > 1
    out = []
    for u in problem.unknowns[:problem.n_estimates]:
        if u.dataset is not None and several:
            out.append(f"{u.target} ({problem.datasets[u.dataset].name})")
        else:
            out.append(u.target)
    return out


def _residual_rms(problem: _Problem, x, predicted):
    pooled: dict[str, list] = {}
    per = []
    for d, (ds, model) in enumerate(zip(problem.datasets, predicted)):
        p, u0 = problem.values_for(d, x)
        rms = {}
        for c in ds.columns:
            diff = model[c.quantity] - c.values
            rms[c.quantity] = float(np.sqrt(np.mean(diff ** 2)))
            pooled.setdefault(c.quantity, []).append(diff)
        per.append({"name": ds.name, "parameters": problem.system.param_dict(p),
                    "initial": {s: float(v) for s, v in zip(problem.system.states, u0)},
                    "residual_rms": rms, "model": model})
    return {q: float(np.sqrt(np.mean(np.concatenate(v) ** 2))) for q, v in pooled.items()}, per


def predict(system: CompiledSystem, dataset: DataSet, p, u0, t_start: float = 0.0, *, rtol: float = 1e-9,
            atol: float = 1e-11, method: str = "dop853") -> dict[str, np.ndarray]:
    """The model's value of every column of ``dataset`` at its sample times (for residuals)."""
    system.refuse_delays("fitting to data")
    sens = Sensitivities(system, [])
    run = sens.run(u0, p, 0.0 if system.kind == MAP else t_start, dataset.time, rtol=rtol, atol=atol, method=method)
    obs = Observer(system, dataset.quantities())
    return {q: obs.observe(q, run, p)[0] for q in dataset.quantities()}
