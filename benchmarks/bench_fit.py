"""Fit of a 3-parameter oscillator (c, k, k3 of x'' = -c x' - k x - k3 x^3) to 2,000 noisy samples:
``analyses.fitting`` (sensitivity equations) against ``least_squares`` with finite differences on
solve_ivp, and against the same fit with its sensitivities computed the way they were before the
model's sensitivity kernel: the stacked system (u, S, Phi) lambdified from sympy and integrated by
solve_ivp (``LambdifiedSensitivities``, kept here only as the baseline)."""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

from benchmarks.harness import Row, interleaved
from orbitdesk.document.datasets import DataColumn, DataSet
from orbitdesk.analyses import fitting, sensitivity
from orbitdesk.analyses.fitting import FitSettings, fit
from orbitdesk.system.compiled_system import compile_model, lambdify

MODEL = """c = 0.5 in [0, 5]
k = 3 in [0.1, 20]
k3 = 0.5 in [0, 5]
x'' = -c*x' - k*x - k3*x^3
x(0) = 1.5
x'(0) = 0
"""
TRUTH = (0.3, 4.0, 1.2)
RTOL, ATOL = 1e-8, 1e-10


def record():
    t = np.linspace(0, 20, 2000)
    c, k, k3 = TRUTH
    sol = solve_ivp(lambda _t, y: [y[1], -c * y[1] - k * y[0] - k3 * y[0] ** 3], (0, 20), [1.5, 0], t_eval=t,
                    method="DOP853", rtol=1e-12, atol=1e-12)
    rng = np.random.default_rng(0)
    return t, sol.y[0] + 0.01 * rng.standard_normal(t.size)


class LambdifiedSensitivities(sensitivity.Sensitivities):
    """The sensitivities as computed before (the baseline): the stacked system printed by lambdify from
    the symbolic J and df/dp (dense), integrated by solve_ivp DOP853. Same layout as the kernel's."""

    def run(self, u0, p, t_start, times, *, rtol=1e-8, atol=1e-10, method="dop853", cancel=None):
        import sympy as sp

        if not hasattr(self, "_fn"):
            system, n, P = self.system, self.n, self.P
            t, u, pp, _ = system._plain
            J = sp.Matrix(n, n, system.plain(list(system.jacobian)))
            fp = sp.Matrix(n, P, system.plain(list(system.param_jacobian)))
            V = sp.Matrix(n, self.which, [sp.Symbol(f"_v{i}", real=True) for i in range(n * self.which)])
            forcing = fp.row_join(sp.zeros(n, n))
            self._fn = lambdify([t, *u, *V, *pp], list(system.plain(system.f)) + list(J * V + forcing))
        fn, pv = self._fn, tuple(float(v) for v in p)
        sol = solve_ivp(lambda tt, zz: fn(tt, *zz, *pv), (t_start, times[-1]), self.start(u0), method="DOP853",
                        t_eval=times, rtol=rtol, atol=atol)
        return self._split(sol.y, times)


def run() -> list[Row]:
    system = compile_model(MODEL)
    t, y = record()
    data = [DataSet("record", t, [DataColumn("x", y)])]
    out = {}
    solves = [0]

    def model(q):
        solves[0] += 1
        c, k, k3 = q
        sol = solve_ivp(lambda _t, u: [u[1], -c * u[1] - k * u[0] - k3 * u[0] ** 3], (0, 20), [1.5, 0], t_eval=t,
                        method="DOP853", rtol=RTOL, atol=ATOL)
        return sol.y[0] - y

    def ours():
        out["ours"] = fit(system, data, FitSettings(parameters=["c", "k", "k3"], rtol=RTOL, atol=ATOL,
                                                    tolerance=1e-8))

    def baseline():
        solves[0] = 0
        out["base"] = least_squares(model, [0.5, 3.0, 0.5], bounds=([0, 0.1, 0], [5, 20, 5]), method="trf",
                                    x_scale="jac", ftol=1e-8, xtol=1e-8, gtol=1e-8)
        out["solves"] = solves[0]

    def before():
        kernel = fitting.Sensitivities
        fitting.Sensitivities = LambdifiedSensitivities
        try:
            out["before"] = fit(system, data, FitSettings(parameters=["c", "k", "k3"], rtol=RTOL, atol=ATOL,
                                                          tolerance=1e-8))
        finally:
            fitting.Sensitivities = kernel

    ours()  # the model's kernels and its sensitivity kernel compiled (or loaded from the cache) first
    a, b = interleaved(ours, baseline, repeats=3)
    c, d = interleaved(ours, before, repeats=3)
    ours_x = np.array([e.value for e in out["ours"].estimates])
    diff = np.max(np.abs(ours_x - out["base"].x) / np.abs(out["base"].x))
    before_x = np.array([e.value for e in out["before"].estimates])
    diff_before = np.max(np.abs(ours_x - before_x) / np.abs(before_x))
    check = (f"evaluations: ours {out['ours'].evaluations} runs with sensitivities, baseline {out['solves']} "
             f"solve_ivp runs; estimates agree to {diff:.1e} relative")
    check_before = (f"evaluations: ours {out['ours'].evaluations}, before {out['before'].evaluations}; estimates "
                    f"agree to {diff_before:.1e} relative")
    return [Row("3-parameter oscillator fit, 2,000 samples", a, b, check,
                "least_squares 2-point on solve_ivp DOP853", "≥ 1x"),
            Row("same fit, sensitivities before/after the sensitivity kernel", c, d, check_before,
                "stacked system lambdified, solve_ivp DOP853", "≥ 1x")]


if __name__ == "__main__":
    from benchmarks.harness import print_table

    print_table(run())
