"""Equations nonlinear in the parameters: scipy's ``least_squares`` (trust region) on the stacked residuals.

For a system the residuals of each row are whitened by the Cholesky factor of the residual
covariance Σ (``sur``: Σ from a first unweighted fit; ``iterated``: re-estimated until the
parameters settle, which is maximum likelihood).  The covariance of the estimates is the
inverse of J'J for the whitened Jacobian J (one equation: s² (J'J)⁻¹ with s² on the
residual degrees of freedom), the usual Gauss–Newton approximation.
"""
from __future__ import annotations

import numpy as np
import sympy as sp
from scipy.optimize import least_squares

from ...errors import DualityError
from .data import evaluate
from .equations import EquationSystem
from .linear import METHODS, RawFit


def _compile(system: EquationSystem, arrays, n: int):
    free = list(system.free)
    data_syms = sorted({s for e in system.equations for s in e.rhs.free_symbols
                        if s not in set(free)}, key=str)
    cols = [arrays[s] for s in data_syms]
    fns, jacs, lhs = [], [], []
    for eq in system.equations:
        fns.append(sp.lambdify(free + data_syms, eq.rhs, "numpy"))
        jacs.append([sp.lambdify(free + data_syms, sp.diff(eq.rhs, p), "numpy") for p in free])
        lhs.append(evaluate(eq.dependent, arrays, n))
    Y = np.column_stack(lhs)

    def resid(theta):
        return np.column_stack([Y[:, g] - np.broadcast_to(f(*theta, *cols), (n,))
                                for g, f in enumerate(fns)])

    def jac(theta):  # n × G × k
        return np.stack([np.column_stack([-np.broadcast_to(j(*theta, *cols), (n,))
                                          for j in row]) for row in jacs], axis=1)
    return Y, resid, jac


def _at_boundary(J, W, tol) -> bool:
    """The whitened Jacobian is numerically singular (its smallest singular value below
    √tol times its largest): the parameters sit where a reparametrisation degenerates."""
    n, G, k = J.shape
    sv = np.linalg.svd(np.einsum("ngk,gh->nhk", J, W).reshape(n * G, k), compute_uv=False)
    return bool(sv[-1] <= np.sqrt(tol) * sv[0])


def fit_nonlinear(system: EquationSystem, arrays, n: int, start: np.ndarray, *,
                  method: str = "iterated", max_iter: int = 200, tol: float = 1e-8,
                  boundary_ok: bool = False) -> RawFit:
    """Nonlinear least squares (one equation) or nonlinear SUR (a system).

    ``boundary_ok``: a singular Jacobian at the estimates is accepted (a parametrisation
    that reaches a boundary, e.g. curvature that binds) and the covariance is the
    pseudo-inverse; otherwise it is an identification error.
    """
    if method not in METHODS:
        raise DualityError(f"method {method!r} is not one of {', '.join(METHODS)}")
    Y, resid, jac = _compile(system, arrays, n)
    G, k = Y.shape[1], len(system.free)

    def solve(theta0, W):  # W: whitening, residual rows times W
        def f(t):
            r = resid(t) @ W
            return r.ravel()

        def J(t):
            return np.einsum("ngk,gh->nhk", jac(t), W).reshape(n * G, k)
        with np.errstate(all="ignore"):
            sol = least_squares(f, theta0, jac=J, method="trf", xtol=1e-10, ftol=1e-10,
                                gtol=1e-10, max_nfev=200 * (k + 1))
        if not np.all(np.isfinite(sol.x)) or not np.all(np.isfinite(sol.fun)):
            raise DualityError("nonlinear least squares reached parameter values where the "
                               "equations are not defined; give start values closer to the "
                               "estimates (start={...})")
        return sol

    with np.errstate(all="ignore"):
        r0 = resid(start)
    if not np.all(np.isfinite(r0)):
        raise DualityError("the equations are not defined at the start values; give start "
                           "values (start={...}) where they are")
    W = np.eye(G)
    stopped_on_fit = False
    sol = solve(start, W)
    theta = sol.x
    iterations, converged = 1, bool(sol.success)
    if G > 1 and method in ("sur", "iterated"):
        for it in range(max_iter):
            R = resid(theta)
            S = R.T @ R / n
            W = np.linalg.inv(np.linalg.cholesky(S)).T
            new = solve(theta, W)
            iterations += 1
            step = np.max(np.abs(new.x - theta) / (1 + np.abs(theta)))
            theta = new.x
            converged = bool(new.success)
            if method == "sur" or step < tol:
                break
            # where a reparametrisation reaches its boundary (curvature that binds) the
            # parameters creep along directions of almost equal fit (the objective is quartic
            # there); the iteration then stops once the residual covariance has settled
            if boundary_ok and _at_boundary(jac(theta), W, tol):
                R1 = resid(theta)
                if np.max(np.abs(R1.T @ R1 / n - S)) <= np.sqrt(tol) * np.max(np.abs(S)):
                    stopped_on_fit = True
                    break
        else:
            raise DualityError(f"iterated nonlinear SUR did not converge in {max_iter} "
                               "iterations; raise max_iter or use method='sur'")
        # covariance at the final Σ (maximum likelihood for iterated)
        R = resid(theta)
        W = np.linalg.inv(np.linalg.cholesky(R.T @ R / n)).T
    if not converged:
        raise DualityError("nonlinear least squares did not converge; give start values "
                           "(start={...}) or fix poorly identified parameters")
    Jw = np.einsum("ngk,gh->nhk", jac(theta), W).reshape(n * G, k)
    JtJ = Jw.T @ Jw
    if np.linalg.matrix_rank(JtJ) < k:
        if not boundary_ok:
            _, vecs = np.linalg.eigh(JtJ)
            null = np.abs(vecs[:, 0])   # the direction the data do not determine
            names = [system.free[i].name for i in np.argsort(-null) if null[i] > 0.1]
            raise DualityError("the parameters are not identified at the estimates "
                               f"(singular Jacobian): {', '.join(names)} move together "
                               "without changing the fit; fix one of them")
        cov = np.linalg.pinv(JtJ)
    else:
        cov = np.linalg.inv(JtJ)
    R = resid(theta)
    if G == 1:
        cov = cov * float(R[:, 0] @ R[:, 0]) / (n - k)
    est = ("nonlinear least squares" if G == 1 or method == "ols" else
           {"sur": "two-step nonlinear SUR", "iterated": "iterated nonlinear SUR"}[method])
    ks = [sum(1 for p in system.free if p in e.rhs.free_symbols) for e in system.equations]
    how = ("scipy least_squares; stopped when the residual covariance settled to a relative "
           f"{np.sqrt(tol):.0e}" if stopped_on_fit else "scipy least_squares")
    return RawFit(theta, cov, R.T @ R, ((Y - Y.mean(axis=0)) ** 2).sum(axis=0), ks,
                  iterations, True, f"{est} ({how})")


__all__ = ["fit_nonlinear"]
