"""Corner solutions of the numeric route, checked by the Kuhn–Tucker conditions.

The numeric route solves its problems in log-quantities (z = log x), whose first-order
conditions x_i·(∂f/∂x_i − λ p_i) = 0 are also met as x_i → 0 whatever the sign of the
marginal condition.  A returned point where a non-negativity bound x_i ≥ 0 binds is therefore
kept only when the Kuhn–Tucker conditions hold there (Varian, Microeconomic Analysis, 3rd ed.,
ch. 7 and §27.5; Mas-Colell, Whinston and Green 3.D, from memory):

* utility  — max f(x) s.t. p·x = m, x ≥ 0: ∂f/∂x_i = λ p_i where x_i > 0 and
  ∂f/∂x_i ≤ λ p_i where x_i = 0, with λ > 0;
* spending — min w·x s.t. f(x) ≥ level, x ≥ 0: μ ∂f/∂x_i = w_i where x_i > 0 and
  μ ∂f/∂x_i ≤ w_i where x_i = 0, with μ > 0;
* profit   — max p f(x) − w·x, x ≥ 0: p ∂f/∂x_i = w_i where x_i > 0 and p ∂f/∂x_i ≤ w_i
  where x_i = 0.

:func:`kkt_holds` checks these at whole batches of points (the multiplier is read off the
goods in positive amount); :func:`bounded_point` solves one point with the bounds
x ≥ 0 in the quantities themselves (SLSQP), for points the interior solver could not
finish because the optimum is a corner, then snaps the goods at their bound to exactly zero,
restores the constraint, and keeps the point only when :func:`kkt_holds` confirms it.
Bounds of the function's own domain above zero (log(x1 − 2)) are open: no optimum sits there.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import optimize

from .domain import code

#: a quantity at most this share of what the budget (or spending) could buy of it is at
#: its bound x_i = 0
BOUND_SHARE = 1e-8
#: relative tolerance of the Kuhn–Tucker conditions at a returned point
KKT_RTOL = 1e-6


def at_bound(X: np.ndarray, prices: np.ndarray, lower: np.ndarray | None) -> np.ndarray:
    """(N, n) mask: quantity i of point k sits on its non-negativity bound."""
    with np.errstate(all="ignore"):
        spend = np.einsum("ij,ij->i", prices, np.abs(X))
        reach = spend[:, None] / prices
        near = np.abs(X) <= BOUND_SHARE * np.maximum(reach, 1e-300)
    if lower is not None:
        near &= np.asarray(lower, float) == 0     # an open domain bound is no corner
    return near


def kkt_holds(kind: str, G: np.ndarray, prices: np.ndarray, bound: np.ndarray,
              output_price: np.ndarray | None = None) -> np.ndarray:
    """Per point: the Kuhn–Tucker conditions of ``kind`` hold at gradient ``G`` (N, n)
    with the goods in ``bound`` at zero (see the module text)."""
    G = np.asarray(G, float)
    free = ~bound
    with np.errstate(all="ignore"):
        if kind == "profit":
            r = output_price[:, None] * G - prices
            scale = prices
        elif kind == "utility":
            lam = (np.where(free, G * prices, 0).sum(1)
                   / np.where(free, prices ** 2, 0).sum(1))
            r = G - lam[:, None] * prices
            scale = np.abs(lam)[:, None] * prices
            sign_ok = lam > 0
        else:
            mu = (np.where(free, G * prices, 0).sum(1)
                  / np.where(free, G ** 2, 0).sum(1))
            r = mu[:, None] * G - prices
            scale = prices
            sign_ok = mu > 0
        tol = KKT_RTOL * scale
        stationary = np.where(free, np.abs(r) <= tol, True).all(1)
        slack = np.where(bound, r <= tol, True).all(1)   # NaN or +inf marginal: fails
    ok = stationary & slack
    if kind != "profit":
        ok &= sign_ok
    return ok


def bounded_point(kind: str, F, prices: np.ndarray, arg: float,
                  lower: np.ndarray | None = None):
    """One point solved with the bounds x ≥ 0 (``F`` evaluates f and ∇f); ``arg`` is the
    income (utility), level (spending) or output price (profit).

    Returns (value, x, output, corner) with ``corner`` a bool mask of the goods at zero, or
    None when no point meeting the Kuhn–Tucker conditions was found."""
    n = len(prices)
    lo = np.zeros(n) if lower is None else np.maximum(np.asarray(lower, float), 0.0)
    if kind == "utility":
        room = arg - prices @ lo
        if not room > 0:
            return None
        x0 = lo + room / (n * prices)
        cons = [{"type": "eq", "fun": lambda x: (prices @ x - arg) / arg,
                 "jac": lambda x: prices / arg}]
        res = optimize.minimize(lambda x: -F.f(x), x0, jac=lambda x: -F.g(x),
                                bounds=list(zip(lo, lo + room / prices)), constraints=cons,
                                method="SLSQP", options={"ftol": 1e-15, "maxiter": 500})
    elif kind == "spending":
        x0 = _start_ray(F, prices, arg, lo)
        if x0 is None:
            return None
        s = float(prices @ x0)
        cons = [{"type": "ineq", "fun": lambda x: F.f(x) - arg, "jac": lambda x: F.g(x)}]
        res = optimize.minimize(lambda x: prices @ x / s, x0, jac=lambda x: prices / s,
                                bounds=[(b, None) for b in lo], constraints=cons,
                                method="SLSQP", options={"ftol": 1e-15, "maxiter": 500})
    else:
        x0 = lo + 1.0 / prices
        res = optimize.minimize(lambda x: -(arg * F.f(x) - prices @ x), x0,
                                jac=lambda x: -(arg * F.g(x) - prices), method="L-BFGS-B",
                                bounds=[(b, None) for b in lo],
                                options={"ftol": 1e-15, "gtol": 1e-12, "maxiter": 2000})
    x = np.asarray(res.x, float)
    if not np.all(np.isfinite(x)):
        return None
    bound = at_bound(x[None, :], prices[None, :], None if lower is None else lower[None, :])[0]
    bound |= (x <= 0)
    if lower is not None:
        bound &= np.asarray(lower, float) == 0
    x = np.where(bound, 0.0, x)
    x = _restore(kind, F, prices, arg, x, bound)
    if x is None:
        return None
    G = F.g(x)[None, :]
    ok = kkt_holds(kind, G, prices[None, :], bound[None, :],
                   np.array([arg]) if kind == "profit" else None)[0]
    if not ok:
        return None
    if kind == "utility":
        return F.f(x), x, math.nan, bound
    if kind == "spending":
        return float(prices @ x), x, math.nan, bound
    y = F.f(x)
    return arg * y - float(prices @ x), x, y, bound


class _Point:
    """f and ∇f of a compiled model (:class:`duality.solve.numeric.Compiled`) at one
    parameter point."""

    def __init__(self, comp, pvals):
        self.c, self.p = comp, pvals

    def f(self, x):
        with np.errstate(all="ignore"):
            return float(np.real(self.c.f(*x, *self.p)))

    def g(self, x):
        with np.errstate(all="ignore"):
            return np.real(np.asarray(self.c.grad(*x, *self.p), dtype=complex)).reshape(-1)


def rescue(kind, comp, prices, arg, params, lower, value, X, Y, ok, which) -> np.ndarray:
    """The points ``which`` (indices the interior solver did not finish), solved with the
    bounds x ≥ 0 and kept where a bound binds and the Kuhn–Tucker conditions hold (in
    place; an interior point stays with the interior solver's stricter test, and x = 0 in
    a profit problem is the shut-down comparison's); returns the corner mask."""
    corner = np.zeros(ok.size, dtype=bool)
    for k in which:
        F = _Point(comp, tuple(float(p[k]) for p in params))
        try:
            out = bounded_point(kind, F, prices[k], float(arg[k]),
                                None if lower is None else lower[k])
        except (ArithmeticError, ValueError):
            out = None
        if out is None or not out[3].any() or (kind == "profit" and out[3].all()):
            continue
        value[k], X[k] = out[0], out[1]
        if Y is not None:
            Y[k] = out[2]
        ok[k] = True
        corner[k] = bool(out[3].any())
    return corner


def verify(kind, bcomp, prices, arg, params, lower, X, reason) -> np.ndarray:
    """At every solved point where a quantity sits at zero, check the Kuhn–Tucker
    conditions; a point where they fail gets the reason ``kkt_fails`` (in place).  Returns
    the mask of points that are checked corners."""
    good = reason == code("ok")
    if not good.any():
        return np.zeros(reason.size, dtype=bool)
    bound = at_bound(np.where(good[:, None], X, 1.0), prices, lower) & good[:, None]
    has = bound.any(1)
    if kind == "profit":
        has &= ~bound.all(1)           # shut down (x = 0) is compared with π, not by KKT
    if not has.any():
        return bound.any(1)
    idx = np.flatnonzero(has)
    _, G = bcomp.fg(X[idx], [p[idx] for p in params])
    holds = kkt_holds(kind, G, prices[idx], bound[idx],
                      arg[idx] if kind == "profit" else None)
    reason[idx[~holds]] = code("kkt_fails")
    return bound.any(1) & (reason == code("ok"))


def _start_ray(F, w, level, lo):
    """A point lo + t/w with f = level (t by bisection in log t), or None."""
    base = (1.0 / w) / (1.0 / w).sum()

    def gap(s):
        v = F.f(lo + math.exp(s) * base)
        return v - level if math.isfinite(v) else math.nan
    a, b = -20.0, 20.0
    ga, gb = gap(a), gap(b)
    if not (math.isfinite(gb) and gb >= 0):
        return None
    if not (math.isfinite(ga) and ga <= 0):
        return lo + math.exp(a) * base if math.isfinite(ga) and ga > 0 else None
    return lo + math.exp(optimize.brentq(gap, a, b, xtol=1e-14)) * base


def _restore(kind, F, prices, arg, x, bound):
    """Put the point back on its constraint after the bound goods were set to zero (the
    free goods scaled by one factor); None when that fails."""
    free = ~bound
    if not free.any():
        return x if kind == "profit" else None
    if kind == "utility":
        spent = prices[free] @ x[free]
        if not spent > 0:
            return None
        return np.where(free, x * (arg / spent), x)
    if kind == "spending":
        def gap(t):
            return F.f(np.where(free, x * t, x)) - arg
        try:
            t = optimize.brentq(gap, 0.5, 2.0, xtol=1e-15, rtol=1e-15)
        except (ValueError, RuntimeError):
            return None
        return np.where(free, x * t, x)
    return x


__all__ = ["at_bound", "kkt_holds", "bounded_point", "rescue", "verify", "BOUND_SHARE", "KKT_RTOL"]
