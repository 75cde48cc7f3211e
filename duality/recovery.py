"""Recovering the primal from its dual: the technology from a cost function, the
preference from an expenditure function.

For a cost function c(w, y) (homogeneous of degree one in prices) the input requirement
set and the production function are

    V(y) = {x : w·x >= c(w, y) for all w > 0},
    f(x) = max {y : w·x >= c(w, y) for all w > 0},

and the same with (p, u, e) for an expenditure function and the utility function.  The
formula only sees the concave hull of c in prices: a dual that is not concave gives back
the technology of its concave hull, which :func:`recover` reports.

Two routes, tried in order:

* **symbolic** — Shephard's lemma x_i = ∂c/∂w_i(w, y), i = 1..n, with w_1 = 1, solved for
  (w_2..w_n, y) under the wall-clock budget (log-linear system for power forms; ratios
  x_i/x_1 for homothetic forms; plain ``sympy.solve`` last).  Every candidate is verified
  numerically (c(w(x), f(x)) = w(x)·x, the demands give back x, and w(x) supports V(f(x)))
  before it is returned.  Used only where the dual is concave in prices.
* **numeric** — f(x) is the root in y of φ(y) = min_w (w·x − c(w, y)) over normalised
  prices, which decreases in y; the inner minimisation runs on the price simplex (a grid,
  then L-BFGS-B with the analytic gradient x − ∇c, i.e. the conditional demands).

:meth:`Recovered.isoquant` gives points on the isoquant / indifference curve: the
cost-minimising bundles ∂c/∂w at a fan of price ratios where the dual is concave, else the
boundary of V(y) along a fan of rays, x = s·d with s = max_w c(w, y)/(w·d).
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Any, Callable

import numpy as np
import sympy as sp
from scipy import optimize
from sympy.solvers.solveset import NonlinearError

from .budget import run_with_budget
from .errors import BudgetExceeded, DualityError, NoSolutionError
from .lambdas import numpy_function

#: symbolic methods, cheapest first
SYMBOLIC_METHODS = ("log-linear", "ratio", "solve")

_ROLE_OF_KIND = {"cost": "technology", "expenditure": "preference"}
_WORDS = {"technology": ("cost function", "production function", "isoquant", "output",
                         "input", "c"),
          "preference": ("expenditure function", "utility function", "indifference curve",
                         "utility level", "good", "e")}


# -- the result ----------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Recovered:
    """A production or utility function recovered from its cost or expenditure function.

    Attributes
    ----------
    role : {"technology", "preference"}
    quantities : tuple of Symbol
        The inputs or goods (the dual's quantity names).
    prices : tuple of Symbol
    level : Symbol
        Output or utility level symbol of the dual.
    expr : sympy.Expr or None
        Closed form f(x) / U(x) in the quantities (and any free parameters); None when
        only the numeric route applies.
    route : {"symbolic", "numeric"}
    method : str
    notes : tuple of str
        Why earlier routes stopped; where concavity in prices failed.
    concave_in_prices : bool or None
        Whether the dual passed the numeric concavity check (None: not checked, free
        parameters).
    dual : Derived
        The cost or expenditure function the primal was recovered from.
    """

    role: str
    quantities: tuple
    prices: tuple
    level: sp.Symbol
    expr: sp.Expr | None
    route: str
    method: str
    notes: tuple
    concave_in_prices: bool | None
    dual: Any = field(repr=False)
    _engine: Any = field(default=None, repr=False)
    _free: tuple = field(default=(), repr=False)
    _zbounds: tuple = field(default=(-30.0, 30.0), repr=False)

    # -- views -------------------------------------------------------------------------
    @property
    def label(self) -> str:
        return _WORDS[self.role][1]

    def __repr__(self) -> str:
        body = "numeric only" if self.expr is None else str(self.expr)
        return (f"<recovered {self.label} of ({', '.join(map(str, self.quantities))}) = "
                f"{body} [{self.route}]>")

    def summary(self) -> str:
        lines = [f"{self.label}: {self.level}({', '.join(map(str, self.quantities))}) = "
                 f"{'(numeric only)' if self.expr is None else self.expr}",
                 f"  route: {self.route} ({self.method})",
                 f"  concave in prices: {self.concave_in_prices}"]
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

    # -- evaluation ----------------------------------------------------------------------
    def __call__(self, **values) -> float | np.ndarray:
        """The output / utility level at keyword quantities (numpy arrays broadcast).

        Raises
        ------
        DualityError
            A missing, unknown, non-positive or non-finite quantity.
        NoSolutionError
            No level could be found at a scalar point (array points come back as NaN).
        """
        names = [str(q) for q in self.quantities]
        free = {str(s): s for s in self._free}
        unknown = [k for k in values if k not in names and k not in free]
        if unknown:
            raise DualityError(f"unknown argument '{unknown[0]}'; the {self.label} takes "
                               f"{', '.join(names)}")
        missing = [k for k in names if k not in values]
        if missing:
            raise DualityError(f"no value for {', '.join(missing)}; the {self.label} takes "
                               f"{', '.join(names)}")
        arrs = []
        for k in names:
            a = np.asarray(values[k], dtype=float)
            if not np.all(np.isfinite(a)):
                raise DualityError(f"{k} must be finite")
            if not np.all(a > 0):
                raise DualityError(f"{k} must be positive; got {a.reshape(-1)[np.argmin(a > 0)]:g}")
            arrs.append(a)
        try:
            b = np.broadcast_arrays(*arrs)
        except ValueError as exc:
            raise DualityError(f"quantity arrays do not broadcast together: {exc}") from None
        scalar = all(np.ndim(a) == 0 for a in arrs)
        if self.expr is not None:
            fvals = {free[k]: float(v) for k, v in values.items() if k in free}
            need = [str(s) for s in self._free if s not in fvals]
            if need:
                raise DualityError(f"no value for parameter(s) {', '.join(need)}; pass them "
                                   f"as keywords, e.g. {need[0]}=0.5")
            fn = numpy_function(list(self.quantities), self.expr.xreplace(fvals))
            with np.errstate(all="ignore"):
                out = np.asarray(fn(*b), dtype=complex)
            out = np.where(np.abs(out.imag) <= 1e-12 * (1 + np.abs(out.real)), out.real, np.nan)
            out = np.broadcast_to(out, b[0].shape).astype(float)
        else:
            flat = np.stack([a.reshape(-1) for a in b], axis=1)
            out = np.array([self._engine.level(row) for row in flat]).reshape(b[0].shape)
        if scalar:
            v = float(out.reshape(-1)[0])
            if not math.isfinite(v):
                raise NoSolutionError(f"no {_WORDS[self.role][3]} level found at this point: "
                                      f"w·x >= {_WORDS[self.role][5]}(w, level) has no "
                                      "bracketed boundary level there")
            return v
        return out

    def isoquant(self, level: float, n: int = 50, other: dict | None = None, *,
                 ratios: tuple[float, float] | None = None,
                 with_prices: bool = False):
        """Points on the isoquant (indifference curve) at ``level``, sorted by the first
        quantity.

        Parameters
        ----------
        level : float
            Output or utility level.
        n : int
            Number of points (points where the dual has no finite value are dropped).
        other : mapping, optional
            With more than two quantities: fixed values of the third and later quantities
            (names → values); points then lie in the plane of the first two.  Without it,
            points lie on the isoquant surface in all quantities.
        ratios : (low, high), optional
            Range of the fan of price ratios w_i/w_1 (concave duals) or quantity ratios
            x_i/x_1 (rays, otherwise); default (0.01, 100), clipped to the price domain
            of :func:`recover` for price fans.
        with_prices : bool
            Also return the generating (supporting) prices, normalised to sum to one.

        Returns
        -------
        ndarray of shape (m, n_quantities), and the prices of the same shape when asked.
        """
        eng = self._need_engine("isoquant points")
        if not np.isfinite(level):
            raise DualityError("the level must be finite")
        if eng.positive_level and not level > 0:
            raise DualityError(f"the {_WORDS[self.role][3]} must be positive; got {level:g}")
        if int(n) < 1:
            raise DualityError("n must be at least 1")
        if ratios is None:
            lo, hi = 0.01, 100.0
            if other is None and eng.concave:
                lo = max(lo, math.exp(self._zbounds[0]))
                hi = min(hi, math.exp(self._zbounds[1]))
        else:
            lo, hi = ratios
        if not (0 < lo < hi < np.inf):
            raise DualityError("ratios must be (low, high) with 0 < low < high")
        names = [str(q) for q in self.quantities]
        k = len(names)
        fixed = None
        if other is not None:
            if k < 3:
                raise DualityError("'other' fixes the third and later quantities; this "
                                   f"{self.label} has only {k}")
            extra = set(other) - set(names[2:])
            if extra or set(names[2:]) - set(other):
                raise DualityError(f"'other' must give exactly {', '.join(names[2:])}")
            fixed = np.array([float(other[q]) for q in names[2:]])
            if not np.all(fixed > 0):
                raise DualityError("the fixed quantities in 'other' must be positive")
        if fixed is None and eng.concave:
            pts, ws = eng.shephard_fan(float(level), int(n), lo, hi)
        else:
            pts, ws = eng.ray_fan(float(level), int(n), lo, hi, fixed)
        order = np.argsort(pts[:, 0], kind="stable")
        pts, ws = pts[order], ws[order]
        return (pts, ws) if with_prices else pts

    def _need_engine(self, what: str):
        if self._engine is None:
            raise NoSolutionError(f"{what} need a value for every parameter; free: "
                                  + ", ".join(map(str, self._free)))
        return self._engine


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


# -- helpers on the dual ------------------------------------------------------------------------
def _rationalise(expr: sp.Expr) -> sp.Expr:
    """Floats → nearby simple rationals (exact where the float is a short decimal)."""
    reps = {}
    for f in expr.atoms(sp.Float):
        v = float(f)
        fr = Fraction(v).limit_denominator(10 ** 6)
        if abs(float(fr) - v) <= 1e-14 * max(1.0, abs(v)):
            reps[f] = sp.Rational(fr.numerator, fr.denominator)
        else:
            reps[f] = sp.Rational(Fraction(v))
    return expr.xreplace(reps)


def _sample_prices(n: int, rng, zlo: float, zhi: float) -> np.ndarray:
    """Prices (w_1 = 1) over the price domain (log-ratios clipped to ±12)."""
    glo, ghi = max(zlo, -_Engine.ZGRID), min(zhi, _Engine.ZGRID)
    if n == 2:
        t = np.exp(np.linspace(glo, ghi, 61))
        return np.stack([np.ones_like(t), t], axis=1)
    return np.concatenate([np.ones((300, 1)), np.exp(rng.uniform(glo, ghi, (300, n - 1)))],
                          axis=1)


def _check_homogeneous(c_expr, prices, level, levels, label: str) -> None:
    fn = numpy_function(list(prices) + [level], c_expr)
    rng = np.random.default_rng(5)
    W = np.exp(rng.uniform(-1.0, 1.0, (8, len(prices))))
    for w, y in zip(W, np.resize(levels, 8)):
        with np.errstate(all="ignore"):
            try:
                a = complex(fn(*(2.3 * w), y))
                b = 2.3 * complex(fn(*w, y))
            except (ArithmeticError, ValueError, TypeError):
                continue
        if not (np.isfinite(a) and np.isfinite(b)):
            continue
        if abs(a - b) > 1e-8 * (1.0 + abs(b)):
            at = ", ".join(f"{p}={v:.3g}" for p, v in zip(prices, w))
            raise DualityError(
                f"the {label} is not homogeneous of degree one in prices (at {at}, "
                f"{level}={y:g}: value at 2.3×prices is {a.real:.6g}, 2.3×value is "
                f"{b.real:.6g}); every {label} must be — impose the homogeneity "
                "restrictions before recovering the primal")


def _check_concave(c_expr, prices, level, levels, zlo, zhi) -> tuple[bool, list[str]]:
    """Numeric concavity in prices: the price Hessian at sample points must be negative
    semi-definite (tolerance relative to its size)."""
    n = len(prices)
    H = [[sp.diff(c_expr, a, b) for b in prices] for a in prices]
    fn = numpy_function(list(prices) + [level], sp.Matrix(H))
    rng = np.random.default_rng(9)
    W = _sample_prices(n, rng, zlo, zhi)
    bad = []
    for y in levels:
        for w in W:
            with np.errstate(all="ignore"):
                try:
                    h = np.array(fn(*w, y), dtype=complex)
                except (ArithmeticError, ValueError, TypeError):
                    continue
            if not np.all(np.isfinite(h)) or np.max(np.abs(h.imag)) > 1e-9:
                continue
            h = 0.5 * (h.real + h.real.T)
            ev = np.linalg.eigvalsh(h)
            if ev[-1] > 1e-7 * (1e-12 + np.max(np.abs(ev))):
                bad.append((w / w.sum(), y, ev[-1]))
    if not bad:
        return True, []
    w, y, e = bad[0]
    at = ", ".join(f"{p}={v:.3g}" for p, v in zip(prices, w))
    where = (f"not concave in prices at {len(bad)} of {len(W) * len(levels)} sample points "
             f"(e.g. {at}, {level}={y:g}: the price Hessian has eigenvalue {e:.3g} > 0)")
    return False, [where]


# -- symbolic route (workers run in a killable process) ----------------------------------
def _candidates(method: str, c, prices, level, xs, level_positive: bool):
    """Worker: list of (level expr, {price: expr}) solving Shephard's lemma, w_1 = 1; or
    a reason (str) when the method does not apply."""
    w1, rest = prices[0], list(prices[1:])
    c1 = c.xreplace({w1: sp.Integer(1)})
    ds = [sp.diff(c, w).xreplace({w1: sp.Integer(1)}) for w in prices]
    out = []
    if method == "log-linear":
        Ls = [sp.Symbol(f"_L{i}", real=True) for i in range(len(rest))]
        Ly = sp.Symbol("_Ly", real=True)
        sub = {w: sp.exp(L) for w, L in zip(rest, Ls)}
        sub[level] = sp.exp(Ly)
        eqs = []
        for d, x in zip(ds, xs):
            e = sp.expand_log(sp.log(sp.powsimp(sp.expand_power_base(d.xreplace(sub),
                                                                     force=True),
                                                force=True)), force=True)
            eqs.append(sp.expand(e - sp.log(x)))
        unknowns = Ls + [Ly]
        try:
            A, b = sp.linear_eq_to_matrix(eqs, unknowns)
        except (NonlinearError, ValueError):
            return "the logs of the demands are not linear in the log-prices and log-level"
        if A.free_symbols & set(unknowns) or b.free_symbols & set(unknowns):
            return "the logs of the demands are not linear in the log-prices and log-level"
        if A.det() == 0:
            return "the log-linear system is singular"
        sol = A.LUsolve(b)
        lev = sp.exp(sol[-1])
        ws = {w: sp.exp(sol[i]) for i, w in enumerate(rest)}
        out.append((lev, ws))
        return out
    if method == "ratio":
        ratios = [sp.simplify(d / ds[0]) for d in ds[1:]]
        if any(level in r.free_symbols for r in ratios):
            return "the demand ratios depend on the level (not homothetic)"
        if not rest:
            wsols = [{}]
        else:
            wsols = sp.solve([sp.Eq(r, x / xs[0]) for r, x in zip(ratios, xs[1:])], rest,
                             dict=True)
        for ws in wsols:
            if set(ws) != set(rest):
                continue
            spend = sp.Integer(1) * xs[0] + sum(ws[w] * x for w, x in zip(rest, xs[1:]))
            lev_eq = sp.Eq(c1.xreplace(ws), spend)
            for lev in sp.solve(lev_eq, level):
                out.append((lev, ws))
        return out
    # plain solve
    sols = sp.solve([sp.Eq(d, x) for d, x in zip(ds, xs)], rest + [level], dict=True)
    for s in sols:
        if level in s and all(w in s for w in rest):
            out.append((s[level], {w: s[w] for w in rest}))
    return out


def _simplify_worker(expr, xs):
    """Shortest of a few simplifications (quantities are positive, so powers split)."""
    cands = [expr]

    def tidy(e):
        e = sp.powsimp(sp.expand_power_base(e, force=True), force=True)
        e = e.replace(lambda z: z.is_Pow, lambda z: sp.Pow(z.base, sp.cancel(z.exp)))
        return sp.powsimp(e, force=True)

    steps = (tidy, lambda e: sp.factor(tidy(e)), lambda e: tidy(sp.simplify(tidy(e))),
             lambda e: sp.factor(tidy(sp.simplify(tidy(e)))))
    for step in steps:
        try:
            cands.append(step(expr))
        except Exception:  # noqa: BLE001 - simplification is optional
            continue
    return min(cands, key=lambda e: (sp.count_ops(e), len(str(e))))


class _Context:
    """Everything the symbolic verification needs about the dual."""

    def __init__(self, c_expr, c_exact, prices, level, xs, free, positive_level, engine):
        self.c = c_expr
        self.c_exact = c_exact
        self.prices = list(prices)
        self.level = level
        self.xs = list(xs)
        self.free = list(free)
        self.positive_level = positive_level
        self.engine = engine


def _verify(ctx: _Context, lev, ws) -> tuple[bool, str]:
    rng = np.random.default_rng(21)
    prices, xs = ctx.prices, ctx.xs
    wexprs = [sp.Integer(1)] + [ws[w] for w in prices[1:]]
    args = xs + ctx.free
    try:
        f_lev = numpy_function(args, lev)
        f_ws = [numpy_function(args, e) for e in wexprs]
        f_c = numpy_function(prices + [ctx.level] + ctx.free, ctx.c)
        f_d = [numpy_function(prices + [ctx.level] + ctx.free, sp.diff(ctx.c, p))
               for p in prices]
    except Exception as exc:  # noqa: BLE001
        return False, f"could not be evaluated ({type(exc).__name__})"
    for k in range(6):
        x = rng.uniform(0.5, 3.0, len(xs))
        pv = list(rng.uniform(0.2, 0.6, len(ctx.free)))
        with np.errstate(all="ignore"):
            try:
                y = complex(f_lev(*x, *pv))
                w = np.array([complex(g(*x, *pv)) for g in f_ws])
            except (ArithmeticError, ValueError, TypeError) as exc:
                return False, f"could not be evaluated ({type(exc).__name__})"
        if not (np.isfinite(y) and abs(y.imag) <= 1e-10 * (1 + abs(y.real))):
            return False, "not real at a sample point"
        if np.any(~np.isfinite(w)) or np.any(np.abs(w.imag) > 1e-10 * (1 + np.abs(w.real))) \
                or np.any(w.real <= 0):
            return False, "supporting prices not positive at a sample point"
        y, w = y.real, w.real
        if ctx.positive_level and not y > 0:
            return False, "level not positive at a sample point"
        with np.errstate(all="ignore"):
            try:
                cv = complex(f_c(*w, y, *pv))
                dv = np.array([complex(g(*w, y, *pv)) for g in f_d])
            except (ArithmeticError, ValueError, TypeError) as exc:
                return False, f"dual could not be evaluated ({type(exc).__name__})"
        spend = float(w @ x)
        if not abs(cv - spend) <= 1e-8 * (1 + abs(spend)):
            return False, "c(w(x), f(x)) differs from w(x)·x"
        if not np.all(np.abs(dv - x) <= 1e-8 * (1 + np.abs(x))):
            return False, "the demands at (w(x), f(x)) do not give back x"
        if ctx.engine is not None and k < 3:
            phi, _ = ctx.engine.phi(x, y)
            if not phi >= -1e-8 * (1 + spend):
                return False, "w(x) does not support the input requirement set"
    return True, ""


def _symbolic(ctx: _Context, budget, notes: list):
    deadline = None if budget is None else time.monotonic() + float(budget)
    c_rat = ctx.c_exact
    for method in SYMBOLIC_METHODS:
        remaining = None if deadline is None else deadline - time.monotonic()
        if remaining is not None and remaining <= 0.05:
            notes.append(f"symbolic route stopped: budget of {budget:g} s used up")
            return None
        try:
            cands = run_with_budget(_candidates, method, c_rat, tuple(ctx.prices), ctx.level,
                                    tuple(ctx.xs), ctx.positive_level, budget=remaining)
        except BudgetExceeded:
            notes.append(f"{method} route did not finish within the budget "
                         f"({budget:g} s in all)")
            return None
        except NotImplementedError as exc:
            notes.append(f"{method} route: sympy cannot solve this ({exc})")
            continue
        except Exception as exc:  # noqa: BLE001 - a failing route is a note
            notes.append(f"{method} route failed: {type(exc).__name__}: {exc}")
            continue
        if isinstance(cands, str):
            notes.append(f"{method} route not applicable: {cands}")
            continue
        rejected = []
        for lev, ws in cands:
            ok, why = _verify(ctx, lev, ws)
            if ok:
                if rejected:
                    notes.append(f"{method} route: {len(rejected)} of {len(cands)} solution "
                                 f"branches rejected by the numeric check (e.g. {rejected[0]})")
                remaining = None if deadline is None else deadline - time.monotonic()
                try:
                    if remaining is not None and remaining <= 0.05:
                        raise BudgetExceeded("no time left")
                    lev = run_with_budget(_simplify_worker, lev, tuple(ctx.xs),
                                          budget=remaining)
                except Exception:  # noqa: BLE001 - keep the verified unsimplified form
                    notes.append("simplification of the closed form did not finish within "
                                 "the budget")
                return method, lev
            rejected.append(why)
        if rejected:
            notes.append(f"{method} route: every candidate rejected by the numeric check "
                         f"(e.g. {rejected[0]})")
        else:
            notes.append(f"{method} route found no solution")
    return None


# -- entry point ------------------------------------------------------------------------------
def recover(model_or_dual, *, budget: float | None = 5.0,
            price_ratios: tuple[float, float] | None = None) -> Recovered:
    """Recover the production function (from a cost function) or the utility function
    (from an expenditure function).

    Parameters
    ----------
    model_or_dual : Model or Derived
        A technology or preference (primal or dual side; its cost / expenditure function is
        derived first with :func:`duality.cost` / :func:`duality.expenditure`), or a
        derived cost or expenditure function with a closed form.
    budget : float or None
        Wall-clock seconds for the symbolic route (``0`` skips it; ``None``: no limit).
    price_ratios : (low, high), optional
        Restrict the prices the formula ranges over to ratios w_i/w_1 in [low, high]
        (default: all positive prices).  Flexible forms such as the translog are cost
        functions only locally; outside their regularity region they are not monotone or
        not concave, and the max–min over all prices would see that.

    Returns
    -------
    Recovered

    Raises
    ------
    DualityError
        Input of the wrong kind; a dual that is not homogeneous of degree one in prices.
    NoSolutionError
        The dual has no closed form, or no closed form for the primal was found and the
        numeric route needs a value for every parameter.
    """
    from .derive import cost, expenditure
    from .model import Model
    from .result import Derived

    notes: list[str] = []
    if price_ratios is None:
        zb = (-_Engine.ZMAX, _Engine.ZMAX)
    else:
        try:
            lo, hi = (float(v) for v in price_ratios)
        except (TypeError, ValueError):
            raise DualityError("price_ratios must be a pair (low, high) of numbers") from None
        if not (0 < lo < hi < np.inf):
            raise DualityError(f"price_ratios must satisfy 0 < low < high < inf; got "
                               f"({lo:g}, {hi:g})")
        zb = (math.log(lo), math.log(hi))
        notes.append(f"prices restricted to ratios w_i/w_1 in [{lo:g}, {hi:g}]")
    if isinstance(model_or_dual, Model):
        m = model_or_dual
        dual = cost(m, budget=budget) if m.role == "technology" else \
            expenditure(m, budget=budget)
        if m.is_primal:
            notes.append(f"the {_WORDS[m.role][1]} was given; recovered from its "
                         f"{_WORDS[m.role][0]} (a round trip)")
    elif isinstance(model_or_dual, Derived):
        dual = model_or_dual
    else:
        raise DualityError("recover() needs a technology or preference model, or a cost or "
                           f"expenditure function from cost()/expenditure(), not "
                           f"{type(model_or_dual).__name__}")
    if dual.kind not in _ROLE_OF_KIND:
        raise DualityError(f"recover() works from a cost or an expenditure function; this is "
                           f"a {dual.label} — derive the cost or expenditure function first")
    role = _ROLE_OF_KIND[dual.kind]
    label = _WORDS[role][0]
    if dual.expr is None:
        raise NoSolutionError(f"the {label} has no closed form (numeric only); recovering "
                              "the primal needs the dual as a formula")
    prices, level = tuple(dual.args[:-1]), dual.args[-1]
    xs = tuple(sp.Symbol(q, positive=True) for q in dual.demands)
    if len(xs) != len(prices):  # pragma: no cover - Derived always pairs them
        raise DualityError("the dual's demands do not match its prices")
    c_expr = dual.expr_at_values
    free = tuple(sorted(c_expr.free_symbols - set(prices) - {level}, key=str))

    # level domain: positive for a technology, and for a preference whose dual is not
    # positive at a negative level
    positive_level = role == "technology"
    if not positive_level and not free:
        fn = numpy_function(list(prices) + [level], c_expr)
        with np.errstate(all="ignore"):
            try:
                v = complex(fn(*np.ones(len(prices)), -1.0))
                ok = np.isfinite(v) and abs(v.imag) < 1e-12 and v.real > 0
            except (ArithmeticError, ValueError, TypeError):
                ok = False
        positive_level = not ok
    levels = [0.5, 1.0, 2.0] if positive_level else [-1.0, 0.5, 2.0]

    engine = None
    concave: bool | None = None
    if free:
        notes.append("concavity in prices not checked: free parameter(s) "
                     + ", ".join(map(str, free)))
    else:
        _check_homogeneous(c_expr, prices, level, levels, label)
        concave, where = _check_concave(c_expr, prices, level, levels, *zb)
        if not concave:
            notes.append(f"the {label} is {where[0]}; the recovered "
                         f"{_WORDS[role][1]} is that of its concave hull in prices (the "
                         "max–min formula sees only the hull)")
        engine = _Engine(c_expr, prices, level, positive_level, concave, zb)

    exact = {sym: _rationalise(sp.Float(v)) for sym, v in dual.params.items()}
    c_exact = _rationalise(dual.expr.xreplace(exact))
    ctx = _Context(c_expr, c_exact, prices, level, xs, free, positive_level, engine)
    found = None
    if concave is False:
        notes.append("symbolic route skipped: inverting Shephard's lemma on a dual that is "
                     "not concave would give a wrong primal")
    elif budget is not None and budget <= 0:
        notes.append("symbolic route skipped (budget 0)")
    else:
        found = _symbolic(ctx, budget, notes)
    if found is not None:
        method, expr = found
        return Recovered(role, xs, prices, level, expr, "symbolic",
                         f"Shephard's lemma x = ∇{_WORDS[role][5]}(w, level) with w1 = 1 "
                         f"solved for prices and level ({method} route); verified numerically",
                         tuple(notes), concave, dual, engine, free, zb)
    if free:
        raise NoSolutionError(
            "no closed form for the primal was found (" + "; ".join(notes) + "), and the "
            "numeric route needs a value for every parameter: give "
            + ", ".join(map(str, free)))
    return Recovered(role, xs, prices, level, None, "numeric",
                     f"max–min formula: level = max {{y : min_w (w·x − "
                     f"{_WORDS[role][5]}(w, y)) >= 0}} (Brent's method on the level; inner "
                     "minimisation over normalised prices by grid + L-BFGS-B with analytic "
                     "gradients)", tuple(notes), concave, dual, engine, free, zb)


__all__ = ["recover", "Recovered", "SYMBOLIC_METHODS"]
