"""Numeric recovery: f(x) = max{y : min over prices of w·x − c(w, y) >= 0}."""
from __future__ import annotations

import math
from typing import Callable

import numpy as np
import sympy as sp
from scipy import optimize

from ...model.lambdas import numpy_function





# -- numeric engine ------------------------------------------------------------------------
def _softmax(z: np.ndarray) -> np.ndarray:
    """Rows of z (m, n-1) → rows of prices on the simplex (first logit fixed at 0)."""
    z = np.atleast_2d(z)
    full = np.concatenate([np.zeros((z.shape[0], 1)), z], axis=1)
    full -= full.max(axis=1, keepdims=True)
    e = np.exp(full)
    return e / e.sum(axis=1, keepdims=True)


class _Engine:
    """Numeric evaluation of c(w, level), its price gradient (the demands), the max–min
    formula for the primal, and isoquant points."""

    ZMAX = 30.0
    ZGRID = 12.0

    def __init__(self, c_expr: sp.Expr, prices, level, positive_level: bool, concave: bool,
                 zbounds: tuple[float, float] | None = None):
        self.n = len(prices)
        self.positive_level = positive_level
        self.concave = concave
        self.zlo, self.zhi = zbounds if zbounds is not None else (-self.ZMAX, self.ZMAX)
        args = list(prices) + [level]
        self._c = numpy_function(args, c_expr)
        self._g = [numpy_function(args, sp.diff(c_expr, p)) for p in prices]
        rng = np.random.default_rng(12345)
        glo, ghi = max(self.zlo, -self.ZGRID), min(self.zhi, self.ZGRID)
        if self.n == 2:
            self.zgrid = np.unique(np.concatenate([[self.zlo, self.zhi],
                                                   np.linspace(glo, ghi, 121)]))[:, None]
        else:
            mid = min(max(0.0, self.zlo), self.zhi)
            self.zgrid = np.vstack([np.full((1, self.n - 1), mid),
                                    rng.uniform(glo, ghi, (60 * self.n, self.n - 1))])

    # vectorised evaluation over rows of W
    def c(self, W, y) -> np.ndarray:
        W = np.atleast_2d(W)
        with np.errstate(all="ignore"):
            out = self._c(*W.T, np.full(W.shape[0], y))
        return np.broadcast_to(np.asarray(out, float), (W.shape[0],))

    def grad(self, W, y) -> np.ndarray:
        W = np.atleast_2d(W)
        cols = []
        with np.errstate(all="ignore"):
            for g in self._g:
                v = np.asarray(g(*W.T, np.full(W.shape[0], y)), float)
                cols.append(np.broadcast_to(v, (W.shape[0],)))
        return np.stack(cols, axis=1)

    # optimisation on the simplex -----------------------------------------------------------
    def _simplex_min(self, F: Callable, dF: Callable) -> tuple[float, np.ndarray]:
        """Global-ish minimum of F(W) (vectorised over rows) over the simplex, with logits
        z_j = log(w_{j+1}/w_1) within the price domain.

        A grid in the logits first; then, for two prices, Brent's method on the analytic
        derivative in the bracketing grid cell, and for more, L-BFGS-B from the best grid
        points with the chain-rule gradient of dF (the gradient in prices)."""
        Z = self.zgrid
        vals = F(_softmax(Z))
        vals = np.where(np.isfinite(vals), vals, np.inf)
        if not np.isfinite(vals).any():
            return math.nan, np.full(self.n, math.nan)
        best_v, best_w = float(vals.min()), _softmax(Z[np.argmin(vals)])[0]

        def fun(z):
            w = _softmax(z)
            v = float(F(w)[0])
            gw = dF(w[0])
            if not (np.isfinite(v) and np.all(np.isfinite(gw))):
                return math.inf, np.zeros(len(z))
            return v, w[0, 1:] * (gw[1:] - gw @ w[0])

        if self.n == 2:
            order = np.argsort(vals)[: (1 if self.concave else 2)]
            zs = Z[:, 0]
            for k in order:
                for a, b in ((k - 1, k), (k, k + 1)):
                    if a < 0 or b >= len(zs):
                        continue
                    da, db = fun(np.array([zs[a]]))[1], fun(np.array([zs[b]]))[1]
                    if not (np.isfinite(da).all() and np.isfinite(db).all()
                            and da[0] < 0 < db[0]):
                        continue
                    try:
                        zr = optimize.brentq(lambda t: fun(np.array([t]))[1][0], zs[a], zs[b],
                                             xtol=1e-14, rtol=1e-15, maxiter=200)
                    except (ValueError, RuntimeError):  # pragma: no cover - defensive
                        continue
                    v = fun(np.array([zr]))[0]
                    if np.isfinite(v) and v < best_v:
                        best_v, best_w = v, _softmax(np.array([zr]))[0]
            return best_v, best_w

        starts = Z[np.argsort(vals)[: (1 if self.concave else 4)]]
        bounds = [(self.zlo, self.zhi)] * (self.n - 1)
        for z0 in starts:
            try:
                res = optimize.minimize(fun, z0, jac=True, method="L-BFGS-B", bounds=bounds,
                                        options={"ftol": 1e-16, "gtol": 1e-13,
                                                 "maxiter": 500})
            except (ValueError, FloatingPointError):  # pragma: no cover - defensive
                continue
            v = float(res.fun)
            if np.isfinite(v) and v < best_v:
                best_v, best_w = v, _softmax(res.x)[0]
        return best_v, best_w

    def phi(self, x: np.ndarray, y: float) -> tuple[float, np.ndarray]:
        """φ(y) = min over normalised w of w·x − c(w, y), and the minimising prices."""
        return self._simplex_min(lambda W: W @ x - self.c(W, y),
                                 lambda w: x - self.grad(w, y)[0])

    def level(self, x: np.ndarray) -> float:
        """f(x) = max {y : φ(y) >= 0}: bracket, then Brent's method (in log y for a
        positive level), then a Newton polish on Shephard's lemma where c is concave."""
        x = np.asarray(x, float)
        scale = float(np.sum(x))
        tol = 1e-13 * scale

        if self.positive_level:
            to_y, step0 = math.exp, 1.0
        else:
            to_y, step0 = (lambda s: s), 1.0

        def g(s):
            v = self.phi(x, to_y(s))[0]
            return v if np.isfinite(v) else -np.inf  # outside the domain: treat as too high

        s0 = 0.0
        g0 = g(s0)
        if not np.isfinite(g0) and g0 != -np.inf:
            return math.nan
        lo = hi = None
        step = step0
        if g0 >= 0:
            lo = s0
            for _ in range(200):
                s = s0 + step
                if g(s) < 0:
                    hi = s
                    break
                lo, step = s, step * 2
        else:
            hi = s0
            for _ in range(200):
                s = s0 - step
                gs = g(s)
                if gs >= 0:
                    lo = s
                    break
                hi, step = s, step * 2
        if lo is None or hi is None or (self.positive_level and min(lo, hi) < -700.0):
            return math.nan  # no boundary level in the range of floating-point numbers
        gl, gh = g(lo), g(hi)
        if gh == -np.inf:  # shrink the upper end into the domain
            for _ in range(200):
                mid = 0.5 * (lo + hi)
                gm = g(mid)
                if gm >= 0:
                    lo, gl = mid, gm
                elif np.isfinite(gm):
                    hi, gh = mid, gm
                    break
                else:
                    hi = mid
            if not np.isfinite(gh):
                return math.nan
        if gl == 0:
            return to_y(lo)
        try:
            s = optimize.brentq(g, lo, hi, xtol=1e-15, rtol=1e-15, maxiter=300)
        except (ValueError, RuntimeError):
            return math.nan
        y = to_y(s)
        return self._polish(x, y, tol) if self.concave else y

    def _polish(self, x, y, tol) -> float:
        """Newton on Shephard's lemma x = ∇c(w, y), w_1 = 1, from the max–min answer."""
        _, w = self.phi(x, y)
        if not (np.all(np.isfinite(w)) and w[0] > 0):
            return y
        u0 = np.concatenate([np.log(w[1:] / w[0]),
                             [math.log(y) if self.positive_level else y]])

        def res(u):
            wv = np.concatenate([[1.0], np.exp(u[:-1])])
            yy = math.exp(u[-1]) if self.positive_level else u[-1]
            return self.grad(wv, yy)[0] / x - 1.0

        try:
            with np.errstate(all="ignore"):
                sol = optimize.root(res, u0, method="hybr", options={"xtol": 1e-15})
        except (ValueError, FloatingPointError):  # pragma: no cover - defensive
            return y
        if not (sol.success and np.all(np.isfinite(sol.x))
                and np.max(np.abs(res(sol.x))) < 1e-12):
            return y
        y2 = math.exp(sol.x[-1]) if self.positive_level else float(sol.x[-1])
        if abs(y2 - y) <= 1e-6 * (1.0 + abs(y)):
            return y2
        return y

    # isoquants -------------------------------------------------------------------------------
    def shephard_fan(self, level, n, lo, hi):
        """Cost-minimising bundles ∇c(w, level) at a fan of price vectors."""
        if self.n == 2:
            r = np.geomspace(lo, hi, n)
            W = np.stack([np.ones(n), r], axis=1)
        else:
            rng = np.random.default_rng(7)
            W = np.concatenate([np.ones((n, 1)),
                                np.exp(rng.uniform(math.log(lo), math.log(hi),
                                                   (n, self.n - 1)))], axis=1)
        X = self.grad(W, level)
        keep = np.all(np.isfinite(X) & (X > 0), axis=1)
        W = W[keep]
        return X[keep], W / W.sum(axis=1, keepdims=True)

    def ray_fan(self, level, n, lo, hi, fixed):
        """Boundary of V(level) along rays: x = s·d (first two quantities when others are
        fixed), s = max_w (c(w, level) − w_rest·fixed) / (w_12·d)."""
        m = 2 if fixed is not None else self.n
        rng = np.random.default_rng(11)
        if m == 2:
            r = np.geomspace(lo, hi, n)
            D = np.stack([np.ones(n), r], axis=1)
        else:
            D = np.concatenate([np.ones((n, 1)),
                                np.exp(rng.uniform(math.log(lo), math.log(hi), (n, m - 1)))],
                               axis=1)
        rest = np.zeros(self.n - m) if fixed is None else fixed
        pts, ws = [], []
        for d in D:
            def F(W, d=d):
                W = np.atleast_2d(W)
                return -(self.c(W, level) - W[:, m:] @ rest) / (W[:, :m] @ d)

            def dF(w, d=d):
                den = w[:m] @ d
                num = self.c(w, level)[0] - w[m:] @ rest
                gc = self.grad(w, level)[0].copy()
                gc[m:] -= rest
                gc[:m] -= num / den * d
                return -gc / den

            v, w = self._simplex_min(F, dF)
            s = -v
            if not (np.isfinite(s) and s > 0):
                continue
            pts.append(np.concatenate([s * d, rest]))
            ws.append(w)
        if not pts:
            return np.empty((0, self.n)), np.empty((0, self.n))
        return np.array(pts), np.array(ws)
