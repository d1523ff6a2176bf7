"""Hopf points: location to full precision on the augmented system, frequency, first Lyapunov coefficient.

The augmented system in z = (u, p, v_re, v_im, omega):

    f(u, p) = 0,   J v_re + omega v_im = 0,   J v_im - omega v_re = 0,   c.v_re = 1,   c.v_im = 0

(J v = i omega v for v = v_re + i v_im), solved by Newton's iteration (analyses/newton.py) with its
exact Jacobian but for dJ/dp (by central differences): the kernels' J and df/dp, the bilinear form B
for d(J v)/du.

The first Lyapunov coefficient follows Kuznetsov, Elements of Applied Bifurcation Theory (3rd ed.,
2004), formula (3.20), with A q = i omega q, A^T p = -i omega p, <p, q> = 1:

    l1 = Re[ <p, C(q, q, conj q)> - 2 <p, B(q, A^-1 B(q, conj q))>
             + <p, B(conj q, (2 i omega - A)^-1 B(q, q))> ] / (2 omega)

Its size depends on how q is scaled (its sign does not). We scale q so that <q, q> = 1/2: for the
planar normal form x' = -omega y + c x (x^2 + y^2), y' = omega x + c y (x^2 + y^2) that is q = (1, -i)/2,
the complex coordinate is z = x + i y, and l1 = Re c1 / omega = c / omega (Kuznetsov (3.19)).
Negative: supercritical (a small stable cycle is born: soft onset); positive: subcritical.
"""

from __future__ import annotations

import math

import numpy as np

from orbitdesk.analyses.continuation.functions import ContinuationError, ModelFunctions
from orbitdesk.analyses.newton import Singular, damped_newton

IMAGINARY_PAIR_RTOL = 1e-6


def critical_pair(eigenvalues, scale=None):
    """The index of the eigenvalue with positive imaginary part nearest the imaginary axis, or None."""
    values = np.asarray(eigenvalues, dtype=complex)
    scale = max(1.0, float(np.max(np.abs(values), initial=0.0))) if scale is None else scale
    candidates = [k for k, v in enumerate(values) if v.imag > 1e-8 * scale]
    if not candidates:
        return None
    return min(candidates, key=lambda k: abs(values[k].real))


def hopf_eigenvector(A, omega_guess=None):
    """(omega, q): A q = i omega q, omega > 0, q with |q| = 1 and Re q orthogonal to Im q."""
    values, vectors = np.linalg.eig(A)
    k = critical_pair(values)
    if k is None:
        raise ContinuationError("no complex pair of eigenvalues")
    omega = float(values[k].imag)
    q = vectors[:, k].astype(complex)
    # rotate the phase so that Re q . Im q = 0 (then c = Re q fixes the scaling of the augmented system)
    a, b = q.real, q.imag
    angle = 0.5 * math.atan2(-2 * float(a @ b), float(a @ a - b @ b))
    q = q * np.exp(1j * angle)
    return omega, q / np.linalg.norm(q)


def polish_hopf(funcs: ModelFunctions, p_vector, k: int, u, p_value, tol=1e-13):
    """(u, p, omega, q) at the Hopf point near (u, p_value) by Newton on the augmented system."""
    n = funcs.n

    def params(value):
        pv = np.array(p_vector, dtype=float)
        pv[k] = value
        return pv

    J = funcs.jac(u, params(p_value))
    omega, q = hopf_eigenvector(J)
    scale = 1.0 / float(np.linalg.norm(q.real))
    vr, vi = q.real * scale, q.imag * scale
    c = vr / float(vr @ vr)

    def parts(z):
        return z[:n], z[n], z[n + 1:2 * n + 1], z[2 * n + 1:3 * n + 1], z[-1]

    def F(z):
        uu, pp, vr_, vi_, w = parts(z)
        pv = params(pp)
        A = funcs.jac(uu, pv)
        return np.concatenate([funcs.f(uu, pv), A @ vr_ + w * vi_, A @ vi_ - w * vr_, [c @ vr_ - 1.0, c @ vi_]])

    def DF(z):
        uu, pp, vr_, vi_, w = parts(z)
        pv = params(pp)
        A, eye = funcs.jac(uu, pv), np.eye(n)
        h = 1e-6 * (1.0 + abs(pp))
        dA = (funcs.jac(uu, params(pp + h)) - funcs.jac(uu, params(pp - h))) / (2 * h)
        Br = np.column_stack([funcs.B(uu, pv, vr_, e) for e in eye])  # d(A v_re)/du
        Bi = np.column_stack([funcs.B(uu, pv, vi_, e) for e in eye])
        zero, none = np.zeros((n, n)), np.zeros(n)
        return np.vstack([
            np.column_stack([A, funcs.fp(uu, pv, k), zero, zero, none]),
            np.column_stack([Br, dA @ vr_, A, w * eye, vi_]),
            np.column_stack([Bi, dA @ vi_, -w * eye, A, -vr_]),
            np.concatenate([none, [0.0], c, none, [0.0]]),
            np.concatenate([none, [0.0], none, c, [0.0]])])

    z0 = np.concatenate([np.asarray(u, float), [p_value], vr, vi, [omega]])
    try:
        with np.errstate(all="ignore"):
            z = damped_newton(F, DF, z0, max_iter=30, rejects=(ContinuationError, np.linalg.LinAlgError),
                              done=lambda s: s.norm <= tol * 1e-2 * (1 + np.linalg.norm(s.x))).x
    except (ContinuationError, ValueError, np.linalg.LinAlgError, Singular):
        z = z0
    if not np.all(np.isfinite(z)) or np.linalg.norm(F(z)) > 1e-8 * (1 + np.linalg.norm(z)):
        z = z0  # keep the test-function location
    uu, pp, w = z[:n], float(z[n]), float(z[-1])
    q = z[n + 1:2 * n + 1] + 1j * z[2 * n + 1:3 * n + 1]
    if w < 0:
        w, q = -w, np.conj(q)
    return uu, pp, w, q / np.linalg.norm(q)


def first_lyapunov_coefficient(funcs: ModelFunctions, u, p, omega: float, q=None) -> float:
    """l1 at a Hopf point (u, p) with frequency omega, by Kuznetsov's formula (3.20)."""
    A = funcs.jac(u, p)
    if q is None:
        omega, q = hopf_eigenvector(A)
    q = np.asarray(q, dtype=complex)
    q = q / (math.sqrt(2.0) * np.linalg.norm(q))  # <q, q> = 1/2, see the module's note
    values, vectors = np.linalg.eig(A.T)
    k = int(np.argmin(np.abs(values + 1j * omega)))
    pv = vectors[:, k].astype(complex)
    pv = pv / np.conj(np.vdot(pv, q))  # <p, q> = conj(p) . q = 1
    n = len(q)
    qb = np.conj(q)
    Bqq = funcs.B(u, p, q, q)
    Bqqb = funcs.B(u, p, q, qb)
    Cqqqb = funcs.C(u, p, q, q, qb)
    h11 = np.linalg.solve(A.astype(complex), Bqqb)
    h20 = np.linalg.solve(2j * omega * np.eye(n) - A, Bqq)
    value = (np.vdot(pv, Cqqqb) - 2 * np.vdot(pv, funcs.B(u, p, q, h11)) + np.vdot(pv, funcs.B(u, p, qb, h20)))
    return float(value.real / (2 * omega))
