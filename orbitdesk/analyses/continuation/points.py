"""Curve problems for steady solutions: equilibria of flows and fixed points of maps.

Unknowns x = (u, p_k). Equilibria: G = f(u, p). Fixed points of a map P (f^K of an iterated map, or
the stroboscopic map of a forced flow): G = P(u, p) - u. Test functions, zero at the special points:

- fold:            the parameter component of the tangent
- branch point:    det [DG; t^T] (scaled by its rows)
- Hopf (flows):    prod_{i<j} (lambda_i + lambda_j); neutral saddles (real pairs +-a) are rejected
                   when located
- period doubling: prod (mu_i + 1)           (maps)
- torus:           prod_{i<j} (mu_i mu_j - 1); real pairs mu, 1/mu are rejected when located
"""

from __future__ import annotations

import numpy as np

from orbitdesk.analyses.newton import Singular, damped_newton, difference_gradient
from orbitdesk.analyses.continuation.arclength import SpecialPoint, bordered_determinant
from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions
from orbitdesk.analyses.continuation.hopf import IMAGINARY_PAIR_RTOL, critical_pair, first_lyapunov_coefficient, polish_hopf
from orbitdesk.analyses.continuation.results import BRANCH_POINT, FOLD, HOPF, PERIOD_DOUBLING, TORUS

STABILITY_RTOL = 1e-9


def pair_product(values, combine) -> float:
    """prod over i < j of combine(v_i, v_j), each factor scaled to order one (the sign is what counts)."""
    total = 1.0 + 0j
    for i in range(len(values)):
        for j in range(i + 1, len(values)):
            factor = combine(values[i], values[j])
            total *= factor / (1.0 + abs(values[i]) + abs(values[j]))
    return float(total.real)


def flow_stability(values):
    values = np.asarray(values)
    tol = STABILITY_RTOL * max(1.0, float(np.max(np.abs(values), initial=0.0)))
    top = float(np.max(values.real, initial=-np.inf))
    return True if top < -tol else False if top > tol else None


def map_stability(values):
    values = np.asarray(values)
    top = float(np.max(np.abs(values), initial=0.0))
    return True if top < 1 - STABILITY_RTOL else False if top > 1 + STABILITY_RTOL else None


class SteadyProblem:
    """Shared parts: unknowns, parameter handling, folds and branch points, the place in words."""

    def __init__(self, funcs: ModelFunctions, p_vector, k: int):
        self.funcs, self.n, self.k = funcs, funcs.n, k
        self.p_vector = np.array(p_vector, dtype=float)
        self.size = self.n + 1
        self.names = list(funcs.system.states)
        # a conservative system's neutral points (conservative.py) have their eigenvalues (multipliers) on the
        # imaginary axis (unit circle) all along a branch: no Hopf or torus test there, its sign is round-off
        self.conservative = False

    def params(self, x) -> np.ndarray:
        pv = self.p_vector.copy()
        pv[self.k] = x[-1]
        return pv

    def where(self, x) -> str:
        name = self.funcs.system.parameters[self.k]
        return f"{name} = {x[-1]:.8g}"

    def common_tests(self, x, tangent, only):
        out = {}
        if only in (None, FOLD):
            out[FOLD] = float(tangent[-1])
        if only in (None, BRANCH_POINT):
            out[BRANCH_POINT] = bordered_determinant(self, x, tangent)
        return out

    def special(self, name, x, tangent, data):
        if name == FOLD:
            return SpecialPoint(FOLD, self.polish_fold(x), tangent=tangent)
        if name == BRANCH_POINT:
            return SpecialPoint(BRANCH_POINT, x, tangent=tangent)
        return None

    def polish_fold(self, x):
        """Newton on (G, g) = 0 (analyses/newton.py) where g is the border of [[DG_u, b], [c^T, 0]] (v, g)
        = (0, 1): the rows of G from the problem's Jacobian, g's by differences."""
        A = self.jacobian(x)[:, :-1]
        U, _, Vt = np.linalg.svd(A)
        b, c = U[:, -1], Vt[-1]
        rhs = np.zeros(self.n + 1)
        rhs[-1] = 1.0

        def border(z, DG=None):
            M = (self.jacobian(z) if DG is None else DG)[:, :-1]
            return np.linalg.solve(np.block([[M, b[:, None]], [c[None, :], np.zeros((1, 1))]]), rhs)[-1]

        def F(z):
            return np.append(self.residual(z), border(z))

        def DF(z):
            DG = self.jacobian(z)
            return np.vstack([DG, difference_gradient(border, z, border(z, DG))])

        try:
            with np.errstate(all="ignore"):
                state = damped_newton(F, DF, x, max_iter=20, rejects=(ContinuationError, np.linalg.LinAlgError),
                                      done=lambda s: s.norm <= 1e-15 * (1 + np.linalg.norm(s.x)))
            if np.all(np.isfinite(state.x)) and np.linalg.norm(state.x - x) < 1e-3 * (1 + np.linalg.norm(x)):
                return state.x
        except (ContinuationError, np.linalg.LinAlgError, Singular):
            pass
        return x


class EquilibriumProblem(SteadyProblem):
    def residual(self, x):
        return self.funcs.f(x[:-1], self.params(x))

    def jacobian(self, x):
        pv = self.params(x)
        return np.column_stack([self.funcs.jac(x[:-1], pv), self.funcs.fp(x[:-1], pv, self.k)])

    def describe(self, x):
        values = np.linalg.eigvals(self.funcs.jac(x[:-1], self.params(x))).astype(complex)
        order = np.lexsort((-values.imag, -values.real))
        values = values[order]
        return {"spectrum": values, "stable": flow_stability(values)}

    def tests(self, x, tangent, data, only=None):
        out = self.common_tests(x, tangent, only)
        if only in (None, HOPF) and self.n >= 2 and not self.conservative:
            out[HOPF] = pair_product(data["spectrum"], lambda a, b: a + b)
        return out

    def special(self, name, x, tangent, data):
        if name != HOPF:
            return super().special(name, x, tangent, data)
        values = data["spectrum"]
        scale = max(1.0, float(np.max(np.abs(values))))
        k = critical_pair(values, scale)
        if k is None or abs(values[k].real) > IMAGINARY_PAIR_RTOL * scale * 1e3:
            return None  # a neutral saddle (lambda and -lambda real), not a Hopf point
        pv = self.params(x)
        try:
            u, p, omega, q = polish_hopf(self.funcs, pv, self.k, x[:-1], x[-1])
            l1 = first_lyapunov_coefficient(self.funcs, u, self.params(np.append(u, p)), omega, q)
        except (ContinuationError, np.linalg.LinAlgError):
            return None
        return SpecialPoint(HOPF, np.append(u, p), {"frequency": omega, "first_lyapunov_coefficient": l1,
                                                     "_q": q}, tangent=tangent)


class FixedPointProblem(SteadyProblem):
    """Fixed points of ``mapping(u, p, k) -> (P, DP_u, dP/dp_k)``: f^K of a map or a stroboscopic map."""

    def __init__(self, funcs, p_vector, k, mapping):
        super().__init__(funcs, p_vector, k)
        self.mapping = mapping
        self._cache = (None, None)

    def _eval(self, x):
        key = x.tobytes()
        if self._cache[0] != key:
            self._cache = (key, self.mapping(x[:-1], self.params(x), self.k))
        return self._cache[1]

    def residual(self, x):
        return self._eval(x)[0] - x[:-1]

    def jacobian(self, x):
        _, M, w = self._eval(x)
        return np.column_stack([M - np.eye(self.n), w])

    def describe(self, x):
        values = np.linalg.eigvals(self._eval(x)[1]).astype(complex)
        order = np.lexsort((-values.imag, -np.abs(values)))
        values = values[order]
        return {"spectrum": values, "stable": map_stability(values)}

    def tests(self, x, tangent, data, only=None):
        out = self.common_tests(x, tangent, only)
        values = data["spectrum"]
        if only in (None, PERIOD_DOUBLING):
            out[PERIOD_DOUBLING] = float(np.prod(values + 1.0).real)
        if only in (None, TORUS) and self.n >= 2 and not self.conservative:
            out[TORUS] = pair_product(values, lambda a, b: a * b - 1.0)
        return out

    def special(self, name, x, tangent, data):
        if name == PERIOD_DOUBLING:
            return SpecialPoint(PERIOD_DOUBLING, x, tangent=tangent)
        if name == TORUS:
            values = data["spectrum"]
            pair = [v for v in values if v.imag > 1e-8 and abs(abs(v) - 1) < 1e-5]
            if not pair:
                return None  # a real pair mu, 1/mu: not a torus point
            return SpecialPoint(TORUS, x, {"frequency": float(np.angle(pair[0]))}, tangent=tangent)
        return super().special(name, x, tangent, data)


def map_iterate(funcs: ModelFunctions, K: int):
    """mapping(u, p, k) for f^K of an iterated map."""
    def mapping(u, p, k):
        return funcs.iterate(u, p, K, k)
    return mapping
