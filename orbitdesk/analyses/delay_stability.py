"""Stability of the equilibria of delay models from the characteristic equation.

Linearised at an equilibrium u*, a model with constant delays reads
    y'(t) = A0 y(t) + sum_j A_j y(t - tau_j),
with A0 = df/dx and A_j = df/d(x(t - tau_j)) there (the Jacobian of the augmented system of
``engine/delay.py``). Its characteristic equation det(lambda I - A0 - sum_j A_j exp(-lambda tau_j)) = 0
has infinitely many roots, finitely many in any right half-plane; the equilibrium is stable when all
of them have negative real part.

The rightmost roots are computed as eigenvalues of a spectral discretisation of the infinitesimal
generator of the solution semigroup: Chebyshev collocation on [-tau_max, 0] (Breda, Maset and
Vermiglio, "Pseudospectral differencing methods for characteristic roots of delay differential
equations", SIAM J. Sci. Comput. 27 (2005) 482-495; volume and pages from memory), with the Chebyshev
differentiation matrix
of Trefethen, Spectral Methods in MATLAB (SIAM 2000), program cheb. Two discretisations (N and
N + 16 nodes) are compared and only the roots on which they agree are kept (the far-left
eigenvalues of the matrix are not roots). Each root's vector is the null vector of the
characteristic matrix there.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from orbitdesk.engine.delay import augmented, delay_values

NODES = 40  # Chebyshev collocation nodes (and NODES + 16 for the check)
SHOWN = 8  # rightmost roots listed with an equilibrium
AGREE = 1e-6  # relative agreement of the two discretisations that makes a root
METHOD = ("the rightmost roots of the characteristic equation by Chebyshev collocation of the solution "
          "operator's generator (Breda, Maset and Vermiglio 2005)")


def cheb(N: int):
    """Trefethen's Chebyshev points x_k = cos(pi k / N) and differentiation matrix (Spectral Methods in MATLAB)."""
    x = np.cos(np.pi * np.arange(N + 1) / N)
    c = np.ones(N + 1)
    c[0] = c[-1] = 2.0
    c *= (-1.0) ** np.arange(N + 1)
    X = np.tile(x, (N + 1, 1)).T
    dX = X - X.T
    D = np.outer(c, 1.0 / c) / (dX + np.eye(N + 1))
    D -= np.diag(D.sum(axis=1))
    return x, D


def _lagrange_row(x, point):
    """Values at ``point`` of the Lagrange basis on Chebyshev points ``x`` (barycentric formula)."""
    N = x.size - 1
    w = (-1.0) ** np.arange(N + 1)
    w[0] *= 0.5
    w[-1] *= 0.5
    diff = point - x
    hit = np.nonzero(np.abs(diff) < 1e-14)[0]
    if hit.size:
        row = np.zeros(N + 1)
        row[hit[0]] = 1.0
        return row
    terms = w / diff
    return terms / terms.sum()


def generator_matrix(A0, parts, N: int = NODES) -> np.ndarray:
    """The (N+1)n square matrix whose eigenvalues approximate the characteristic roots.

    ``parts`` is a list of (tau, A_tau)."""
    A0 = np.asarray(A0, dtype=float)
    n = A0.shape[0]
    tau_max = max(tau for tau, _ in parts)
    x, D = cheb(N)
    D = D * (2.0 / tau_max)  # theta = tau_max (x - 1) / 2 maps [-1, 1] onto [-tau_max, 0]; x_0 = 1 is theta = 0
    M = np.kron(D, np.eye(n))
    top = np.zeros((n, (N + 1) * n))
    top[:, :n] = A0
    for tau, A in parts:
        row = _lagrange_row(x, 1.0 - 2.0 * tau / tau_max)
        top += np.kron(row[None, :], np.asarray(A, dtype=float))
    M[:n, :] = top
    return M


def characteristic_roots(A0, parts, N: int = NODES) -> np.ndarray:
    """The rightmost characteristic roots (complex, by descending real part) on which the discretisations
    with N and N + 16 nodes agree."""
    A0 = np.asarray(A0, dtype=float)
    if not parts:
        values = np.linalg.eigvals(A0)
        return values[np.argsort(-values.real)]
    coarse = np.linalg.eigvals(generator_matrix(A0, parts, N))
    fine = np.linalg.eigvals(generator_matrix(A0, parts, N + 16))
    fine = fine[np.argsort(-fine.real)]
    keep = [lam for lam in fine if np.min(np.abs(coarse - lam)) <= AGREE * max(1.0, abs(lam))]
    return np.array(keep, dtype=complex)


def linear_parts(system, u, p) -> tuple[np.ndarray, list]:
    """A0 and [(tau, A_tau)] of the linearisation at the equilibrium ``u`` (delays of equal length added)."""
    n = system.n_states
    u = np.asarray(u, dtype=float)
    taus = delay_values(system, p)
    lag_state = [system.states.index(d.state) for d in system.delays]
    aug = augmented(system)
    J = aug.jac(0.0, np.concatenate([u, u[lag_state]]), p)
    A0 = J[:n, :n]
    parts: dict[float, np.ndarray] = {}
    for k, (i, tau) in enumerate(zip(lag_state, taus)):
        A = parts.setdefault(float(tau), np.zeros((n, n)))
        A[:, i] += J[:n, n + k]
    return A0, sorted(parts.items())


def characteristic_matrix(A0, parts, lam) -> np.ndarray:
    n = A0.shape[0]
    return lam * np.eye(n) - A0 - sum((A * np.exp(-lam * tau) for tau, A in parts), np.zeros((n, n)))


def with_delay_stability(system, p, eq):
    """``eq`` (an equilibrium of the delay-dropped field) with its stability from the delay equation."""
    from orbitdesk.analyses.equilibria import HYPERBOLIC_RTOL, _canonical_sign, zero_round_off

    A0, parts = linear_parts(system, eq.vector, p)
    roots = characteristic_roots(A0, parts)
    roots = roots[np.lexsort((-roots.imag, -roots.real))] if roots.size else roots
    unstable_all = int(np.sum(roots.real > 0))
    shown = zero_round_off(roots[:max(SHOWN, unstable_all)], max(1.0, float(np.max(np.abs(roots), initial=0.0))))
    vectors = np.zeros((A0.shape[0], shown.size), dtype=complex)
    for k, lam in enumerate(shown):
        _, _, vh = np.linalg.svd(characteristic_matrix(A0, parts, lam))
        vectors[:, k] = zero_round_off(_canonical_sign(vh[-1].conj()))
    tol = HYPERBOLIC_RTOL * max(1.0, float(np.max(np.abs(shown), initial=0.0)))
    n_unstable = int(np.sum(shown.real > tol))
    n_center = int(np.sum(np.abs(shown.real) <= tol))
    oscillating = bool(shown.size) and abs(shown[0].imag) > tol
    warnings = list(eq.warnings)
    if n_center:
        kind, stable = "non-hyperbolic", (False if n_unstable else None)
        warnings.append("a characteristic root has zero real part: the linearisation does not decide stability")
    elif n_unstable == 0:
        kind, stable = ("stable, oscillating" if oscillating else "stable"), True
    else:
        kind = f"unstable ({n_unstable} root{'s' if n_unstable > 1 else ''} with positive real part)"
        stable = False
    warnings.append(f"delays: the eigenvalues listed are {METHOD}; the Jacobian shown has the delays dropped")
    # (stability="" : the word follows the roots, not the Jacobian with the delays dropped)
    return replace(eq, eigenvalues=shown, eigenvectors=vectors, kind=kind, stable=stable, stability="",
                   n_stable=int(shown.size) - n_unstable - n_center, n_unstable=n_unstable, n_center=n_center,
                   warnings=warnings)


__all__ = ["METHOD", "characteristic_roots", "cheb", "generator_matrix", "linear_parts", "with_delay_stability"]
