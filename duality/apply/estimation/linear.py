"""Equations linear in the parameters: one equation by statsmodels' OLS, a system by
linearmodels' SUR (constrained least squares, two-step or iterated feasible GLS).

A parameter shared by several equations (a share equation's γ_ij reappears in the log cost
equation) becomes one coefficient per equation in linearmodels, tied by equality
constraints; the restrictions themselves were already imposed by elimination
(:mod:`.equations`).  Known terms of an equation (fixed parameters, the normalising price)
are moved to the left-hand side.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ...errors import DualityError
from .data import evaluate
from .equations import EquationSystem, linear_parts

#: methods and what each does for a system (a single equation is always OLS)
METHODS = {"ols": "least squares, equations weighted equally",
           "sur": "two-step feasible GLS (Zellner 1962)",
           "iterated": "feasible GLS iterated to convergence (maximum likelihood)"}


@dataclass
class RawFit:
    """What an estimator returns, before it is dressed as an :class:`Estimation`."""

    theta: np.ndarray
    cov: np.ndarray
    EE: np.ndarray             # G × G residual cross-products
    sst: np.ndarray            # G: total sum of squares of each left-hand side
    k: list                    # parameters per equation
    iterations: int
    converged: bool
    estimator: str


@dataclass
class Design:
    y: list
    X: list                    # per equation: n × k_e arrays
    cols: list                 # per equation: indices into the free parameters


def design(system: EquationSystem, arrays, n: int) -> Design:
    """Left-hand side and regressors of every equation, evaluated on the data."""
    ys, Xs, cols = [], [], []
    free = list(system.free)
    for eq in system.equations:
        offset, regs = linear_parts(eq, free)
        y = evaluate(eq.dependent, arrays, n) - evaluate(offset, arrays, n)
        X = np.column_stack([evaluate(r, arrays, n) for r in regs.values()]) if regs \
            else np.empty((n, 0))
        ys.append(y)
        Xs.append(X)
        cols.append([free.index(p) for p in regs])
    return Design(ys, Xs, cols)


def _check_rank(system: EquationSystem, d: Design) -> None:
    """Parameters the stacked equations cannot tell apart (collinear regressors), named
    (one-line error).  Works on the cross-products, summed over the equations."""
    free = list(system.free)
    k = len(free)
    XtX = np.zeros((k, k))
    for X, cols in zip(d.X, d.cols):
        XtX[np.ix_(cols, cols)] += X.T @ X
    scale = np.sqrt(np.diag(XtX))
    zero = np.flatnonzero(scale == 0)
    if zero.size:
        raise DualityError(f"the data cannot identify {free[zero[0]].name}: its regressor is "
                           "zero at every row; fix it")
    w, v = np.linalg.eigh(XtX / np.outer(scale, scale))
    if w[0] <= 1e-12 * w[-1]:
        vec = np.abs(v[:, 0])
        names = [free[j].name for j in np.argsort(-vec)[:2] if vec[j] > 1e-6]
        raise DualityError(f"collinear regressors: the data cannot tell {' and '.join(names)} "
                           "apart; fix one of them or use data that vary")


def fit_linear(system: EquationSystem, arrays, n: int, *, method: str = "iterated",
               cov_type: str = "nonrobust", max_iter: int = 200,
               tol: float = 1e-8) -> RawFit:
    if method not in METHODS:
        raise DualityError(f"method {method!r} is not one of {', '.join(METHODS)}")
    d = design(system, arrays, n)
    _check_rank(system, d)
    if len(system.equations) == 1:
        return _ols(system, d, cov_type)
    return _sur(system, d, n, method, cov_type, max_iter, tol)


def _ols(system, d: Design, cov_type: str) -> RawFit:
    import statsmodels.api as sm  # deferred: heavy optional import, only for a fit
    y, X = d.y[0], d.X[0]
    res = sm.OLS(y, X).fit(cov_type=cov_type)
    theta = np.zeros(len(system.free))
    theta[d.cols[0]] = res.params
    cov = np.zeros((len(theta), len(theta)))
    cov[np.ix_(d.cols[0], d.cols[0])] = res.cov_params()
    e = np.asarray(res.resid)
    return RawFit(theta, cov, np.array([[e @ e]]), np.array([((y - y.mean()) ** 2).sum()]),
                  [X.shape[1]], 1, True, "ordinary least squares (statsmodels OLS)")


def _sur(system, d: Design, n: int, method: str, cov_type: str, max_iter: int,
         tol: float) -> RawFit:
    from linearmodels.system import SUR  # deferred: heavy optional import, only for a fit
    free = list(system.free)
    eqs, names = {}, []
    for g, (y, X, cols) in enumerate(zip(d.y, d.X, d.cols)):
        colnames = [f"p{j}" for j in cols]
        eqs[f"e{g}"] = {"dependent": pd.Series(y, name=f"y{g}"),
                        "exog": pd.DataFrame(X, columns=colnames)}
        names += [f"e{g}_{c}" for c in colnames]
    mod = SUR(eqs)
    # tie each parameter shared by several equations: one constraint per extra appearance
    rows = []
    for j in range(len(free)):
        where = [f"e{g}_p{j}" for g, cols in enumerate(d.cols) if j in cols]
        for other in where[1:]:
            r = pd.Series(0.0, index=names)
            r[where[0]], r[other] = 1.0, -1.0
            rows.append(r)
    if rows:
        mod.add_constraints(pd.DataFrame(rows).reset_index(drop=True))
    lm_cov = {"nonrobust": "unadjusted", "unadjusted": "unadjusted",
              "robust": "robust", "HC0": "robust"}.get(cov_type)
    if lm_cov is None:
        raise DualityError(f"cov_type {cov_type!r} is not available for systems; use "
                           "nonrobust or robust")
    if method == "ols":
        res = mod.fit(method="ols", cov_type=lm_cov)
    else:
        res = mod.fit(method="gls", iterate=method == "iterated", iter_limit=max_iter,
                      tol=tol, cov_type=lm_cov)
    iterations = int(getattr(res, "iterations", 1) or 1)
    if method == "iterated" and iterations >= max_iter:
        raise DualityError(f"iterated SUR did not converge in {max_iter} iterations; raise "
                           "max_iter or use method='sur'")
    theta = np.zeros(len(free))
    pick = []
    for j in range(len(free)):
        first = next(f"e{g}_p{j}" for g, cols in enumerate(d.cols) if j in cols)
        theta[j] = res.params[first]
        pick.append(first)
    cov = res.cov.loc[pick, pick].to_numpy()
    resid = np.column_stack([np.asarray(res.resids.iloc[:, g]) for g in range(len(d.y))])
    est = {"ols": "constrained least squares", "sur": "two-step SUR",
           "iterated": "iterated SUR"}[method]
    Y = np.column_stack(d.y)
    return RawFit(theta, cov, resid.T @ resid, ((Y - Y.mean(axis=0)) ** 2).sum(axis=0),
                  [X.shape[1] for X in d.X], iterations, True, f"{est} (linearmodels SUR)")


__all__ = ["METHODS", "RawFit", "design", "fit_linear"]
