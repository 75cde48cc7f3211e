"""Numeric duals where no closed form was found.

Each problem is solved point by point in log-quantities (z = log x keeps every quantity
positive): a start on the right level set, SciPy's SLSQP with analytic gradients and tight
tolerances, then Newton polishing of the first-order conditions with an analytic Jacobian
(from sympy, lambdified once per model).  A point is returned only when the first-order
conditions hold to ``KKT_TOL`` after polishing; otherwise it is NaN and reported through a
:class:`~duality.solve.result.NumericWarning`, never returned as a number.

The problems:

* spending  — min w·x s.t. f(x) = level (cost and expenditure functions);
* utility   — max f(x) s.t. p·x = m (indirect utility);
* profit    — max p f(x) − w·x (profit function).
"""
from __future__ import annotations

import math
import warnings
from functools import cached_property, lru_cache
from typing import Callable

import numpy as np
import sympy as sp
from scipy import optimize

from ..errors import NoSolutionError
from ..model.base import Model
from ..model.lambdas import numpy_function
from . import batch
from . import corners as _corners
from .domain import CODES, REASONS, code, explain, level_floor, model_domain
from .result import BatchSolution, NumericWarning

#: First-order conditions must hold to this (relative) accuracy for a point to count.
KKT_TOL = 1e-9
SOLVER = ("batched Newton on the first-order conditions in log-quantities (analytic "
          "gradients and Hessians, residual 1e-12); points it cannot finish are solved one "
          "by one with SLSQP and Newton polishing")

#: At most this many points of a batch get the careful one-by-one rescue.
RESCUE_LIMIT = 1000


class Compiled:
    """f, its gradient and Hessian as numpy functions of (x, *parameter values).

    f is compiled at once; ∇f and ∇²f when first used (sampling points for the checks
    needs f only, and compiling the Hessian costs more than the rest of a check)."""

    def __init__(self, model: Model):
        self._xs = list(model.quantities)
        self.n = len(self._xs)
        self.params: tuple[sp.Symbol, ...] = tuple(
            sorted(model.expr.free_symbols - set(self._xs), key=str))
        self._expr = model.expr
        self._args = self._xs + list(self.params)
        self.f: Callable = numpy_function(self._args, model.expr, cse=True)

    @cached_property
    def _grad_exprs(self) -> list:
        return [sp.diff(self._expr, x) for x in self._xs]

    @cached_property
    def grad(self) -> Callable:
        return numpy_function(self._args, sp.Matrix(self._grad_exprs), cse=True)

    @cached_property
    def hess(self) -> Callable:
        hess = [[sp.diff(g, x) for x in self._xs] for g in self._grad_exprs]
        return numpy_function(self._args, sp.Matrix(hess), cse=True)


@lru_cache(maxsize=64)
def compile_model(model: Model) -> Compiled:
    """Lambdify f of a model at once, ∇f and ∇²f when first needed (cached per model)."""
    return Compiled(model)


class _Fns:
    """Evaluators of f, ∇f, ∇²f at one parameter point, safe against overflow."""

    def __init__(self, comp: Compiled, pvals: tuple[float, ...], lower=None):
        self.c, self.p = comp, pvals
        #: the domain's lower bounds at these parameter values (None: all zero)
        self.lower = None if lower is None or not np.any(lower) else np.asarray(lower, float)

    def f(self, x):
        with np.errstate(all="ignore"):
            return float(np.real(self.c.f(*x, *self.p)))

    def g(self, x):
        with np.errstate(all="ignore"):
            return np.real(np.asarray(self.c.grad(*x, *self.p),
                                      dtype=complex)).reshape(-1)

    def h(self, x):
        with np.errstate(all="ignore"):
            n = self.c.n
            return np.real(np.asarray(self.c.hess(*x, *self.p),
                                      dtype=complex)).reshape(n, n)


# -- spending: min w·x s.t. f(x) = level ----------------------------------------------
def _start_on_level(F: _Fns, w: np.ndarray, level: float) -> np.ndarray | None:
    """A point on the ray x = L + t/w where f(x) = level (bisection in log t; L is the
    domain's lower corner)."""
    base = 1.0 / w
    base = base / base.sum()
    corner = 0.0 if F.lower is None else F.lower

    def gap(s):
        v = F.f(corner + np.exp(s) * base)
        return v - level if math.isfinite(v) else math.nan

    lo, hi = -2.0, 2.0
    for _ in range(60):
        glo, ghi = gap(lo), gap(hi)
        if math.isfinite(glo) and math.isfinite(ghi) and glo <= 0 <= ghi:
            s = optimize.brentq(gap, lo, hi, xtol=1e-14, rtol=1e-14, maxiter=200)
            return corner + np.exp(s) * base
        if not math.isfinite(glo) or glo > 0:
            lo -= 2.0
        if not math.isfinite(ghi) or ghi < 0:
            hi += 2.0
        if hi > 300 or lo < -300:
            break
    return None


def spending_point(F: _Fns, w: np.ndarray, level: float) -> tuple[float, np.ndarray, bool]:
    """Minimal spending and its bundle at prices ``w`` and level ``level``."""
    n = len(w)
    x0 = _start_on_level(F, w, level)
    if x0 is None:
        return math.nan, np.full(n, math.nan), False
    scale = float(w @ x0)
    lscale = max(abs(level), 1.0)

    def obj(z):
        return float(w @ np.exp(z)) / scale

    def obj_grad(z):
        return w * np.exp(z) / scale

    cons = {"type": "eq",
            "fun": lambda z: np.array([(F.f(np.exp(z)) - level) / lscale]),
            "jac": lambda z: (F.g(np.exp(z)) * np.exp(z) / lscale).reshape(1, -1)}
    z0 = np.log(x0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = optimize.minimize(obj, z0, jac=obj_grad, constraints=[cons], method="SLSQP",
                                options={"ftol": 1e-15, "maxiter": 500})
    z = res.x if np.all(np.isfinite(res.x)) else z0

    # Newton polish on  w_i x_i = lam x_i f_i (scaled)  and  f = level, unknowns (z, lam)
    def kkt(v):
        z_, lam = v[:n], v[n]
        x = np.exp(z_)
        g = F.g(x)
        return np.concatenate([(w - lam * g) * x / scale, [(F.f(x) - level) / lscale]])

    def kkt_jac(v):
        z_, lam = v[:n], v[n]
        x = np.exp(z_)
        g, H = F.g(x), F.h(x)
        J = np.zeros((n + 1, n + 1))
        # d/dz_j of (w_i - lam g_i) x_i = delta_ij (w_i - lam g_i) x_i - lam H_ij x_j x_i
        J[:n, :n] = (np.diag((w - lam * g) * x) - lam * H * np.outer(x, x)) / scale
        J[:n, n] = -g * x / scale
        J[n, :n] = g * x / lscale
        return J

    g0 = F.g(np.exp(z))
    lam0 = float(w @ np.exp(z)) / float(g0 @ np.exp(z)) if np.all(np.isfinite(g0)) and \
        float(g0 @ np.exp(z)) > 0 else 1.0
    v = np.concatenate([z, [lam0]])
    v = _newton(kkt, kkt_jac, v)
    x = np.exp(v[:n])
    ok = _converged(kkt(v)) and _second_order_spending(F, x)
    if not ok:
        return math.nan, np.full(n, math.nan), False
    return float(w @ x), x, True


def _second_order_spending(F: _Fns, x: np.ndarray) -> bool:
    """f is locally quasi-concave at x: its Hessian is NSD on the tangent space of ∇f."""
    g, H = F.g(x), F.h(x)
    if not (np.all(np.isfinite(g)) and np.all(np.isfinite(H))) or len(x) == 1:
        return bool(np.all(np.isfinite(g)))
    Z = _null_basis(g)
    eig = np.linalg.eigvalsh(Z.T @ H @ Z)
    return bool(eig.max() <= 1e-7 * max(1.0, np.abs(H).max()))


def _null_basis(g: np.ndarray) -> np.ndarray:
    _, _, vt = np.linalg.svd(g.reshape(1, -1))
    return vt[1:].T


# -- utility: max f(x) s.t. p·x = m ----------------------------------------------------
def utility_point(F: _Fns, p: np.ndarray, m: float) -> tuple[float, np.ndarray, bool]:
    """Maximal utility and the bundle bought at prices ``p`` and income ``m``."""
    n = len(p)
    x0 = m / (n * p)
    if F.lower is not None:  # start inside the domain: its corner plus an equal share
        left = m - float(p @ F.lower)
        if not left > 0:
            return math.nan, np.full(n, math.nan), False
        x0 = F.lower + left / (n * p)
    fscale = max(abs(F.f(x0)), 1.0)

    def obj(z):
        v = F.f(np.exp(z))
        return -v / fscale if math.isfinite(v) else 1e300

    def obj_grad(z):
        return -F.g(np.exp(z)) * np.exp(z) / fscale

    cons = {"type": "eq", "fun": lambda z: np.array([float(p @ np.exp(z)) / m - 1.0]),
            "jac": lambda z: (p * np.exp(z) / m).reshape(1, -1)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = optimize.minimize(obj, np.log(x0), jac=obj_grad, constraints=[cons],
                                method="SLSQP", options={"ftol": 1e-15, "maxiter": 500})
    z = res.x if np.all(np.isfinite(res.x)) else np.log(x0)

    def kkt(v):
        x = np.exp(v[:n])
        mu = v[n]
        return np.concatenate([(F.g(x) - mu * p) * x / m, [float(p @ x) / m - 1.0]])

    def kkt_jac(v):
        x = np.exp(v[:n])
        mu = v[n]
        g, H = F.g(x), F.h(x)
        J = np.zeros((n + 1, n + 1))
        J[:n, :n] = (np.diag((g - mu * p) * x) + H * np.outer(x, x)) / m
        J[:n, n] = -p * x / m
        J[n, :n] = p * x / m
        return J

    x = np.exp(z)
    mu0 = float(F.g(x) @ x) / m
    v = _newton(kkt, kkt_jac, np.concatenate([z, [mu0]]))
    x = np.exp(v[:n])
    ok = _converged(kkt(v)) and _second_order_spending(F, x)
    if not ok:
        return math.nan, np.full(n, math.nan), False
    return F.f(x), x, True


# -- profit: max p f(x) − w·x --------------------------------------------------------
def profit_point(F: _Fns, price: float, w: np.ndarray) -> tuple[float, float, np.ndarray, bool]:
    """Maximal profit, output and input bundle at output price ``price``, input prices ``w``."""
    n = len(w)
    nan = (math.nan, math.nan, np.full(n, math.nan), False)

    def obj(z):
        x = np.exp(z)
        v = price * F.f(x) - float(w @ x)
        return -v if math.isfinite(v) else 1e300

    def obj_grad(z):
        x = np.exp(z)
        return -(price * F.g(x) - w) * x

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        z0 = np.zeros(n) if F.lower is None else np.log(F.lower + 1.0)
        res = optimize.minimize(obj, z0, jac=obj_grad, method="BFGS",
                                options={"gtol": 1e-12, "maxiter": 2000})
    z = res.x
    if not np.all(np.isfinite(z)) or np.abs(z).max() > 300:
        return nan

    def foc(z_):
        x = np.exp(z_)
        return (price * F.g(x) - w) * x / float(w @ x)

    def foc_jac(z_):
        x = np.exp(z_)
        g, H = F.g(x), F.h(x)
        s = float(w @ x)
        return (np.diag((price * g - w) * x) + price * H * np.outer(x, x)) / s

    z = _newton(foc, foc_jac, z)
    x = np.exp(z)
    H = F.h(x)
    if not (_converged(foc(z)) and np.all(np.isfinite(H))
            and np.linalg.eigvalsh((H + H.T) / 2).max() < 0):
        return nan
    y = F.f(x)
    return price * y - float(w @ x), y, x, True


# -- shared --------------------------------------------------------------------------
def _newton(fun, jac, v, iters: int = 50) -> np.ndarray:
    """Damped Newton on fun(v) = 0; keeps the best point seen."""
    best, best_norm = v, _norm(fun(v))
    for _ in range(iters):
        r = fun(v)
        if not np.all(np.isfinite(r)) or _norm(r) < 1e-15:
            break
        J = jac(v)
        if not np.all(np.isfinite(J)):
            break
        try:
            step = np.linalg.lstsq(J, -r, rcond=None)[0]
        except np.linalg.LinAlgError:
            break
        t = 1.0
        for _ in range(30):
            cand = v + t * step
            nr = _norm(fun(cand))
            if nr < _norm(r):
                break
            t /= 2
        else:
            break
        v = cand
        if nr < best_norm:
            best, best_norm = v, nr
    return best


def _norm(r) -> float:
    r = np.asarray(r, dtype=float)
    return float(np.max(np.abs(r))) if np.all(np.isfinite(r)) else math.inf


def _converged(r) -> bool:
    return _norm(r) <= KKT_TOL


# -- batch front ---------------------------------------------------------------------
class Batch:
    """Solve one problem at every point of a broadcast batch, remembering the last batch.

    ``kind`` is ``spending``, ``utility`` or ``profit``.  Calling with a point dict (symbol
    -> array, as :class:`~duality.solve.result.Derived` passes it) returns a
    :class:`~duality.solve.result.BatchSolution`.
    """

    def __init__(self, model: Model, kind: str):
        self.model, self.kind = model, kind
        self.comp = compile_model(model)
        self._last_key = None
        self._last = None

    def __call__(self, point: dict) -> BatchSolution:
        key = tuple((str(k), np.asarray(v).tobytes(), np.shape(v)) for k, v in
                    sorted(point.items(), key=lambda kv: str(kv[0])))
        if key != self._last_key:
            self._last, self._last_key = self._solve(point), key
        out = self._last
        bad = int((~out.converged).sum())
        if bad:
            warnings.warn(f"no numeric solution at {bad} of {out.converged.size} point(s), "
                          f"returned as NaN: {explain(out.reasons)}",
                          NumericWarning, stacklevel=3)
        return out

    def _solve(self, point: dict) -> BatchSolution:
        m = self.model
        missing = [str(s) for s in self.comp.params if s not in point]
        if missing:
            raise NoSolutionError(f"the numeric route needs values for parameter(s) "
                                  f"{', '.join(missing)}")
        shape = np.broadcast(*[np.asarray(v) for v in point.values()]).shape
        flat = {k: np.broadcast_to(np.asarray(v, dtype=float), shape).reshape(-1)
                for k, v in point.items()}
        prices = np.stack([flat[s] for s in m.prices], axis=1)
        params = [flat[s] for s in self.comp.params]
        if self.kind == "spending":
            res = batch.solve_spending(m, prices, flat[m.level], params)
        elif self.kind == "utility":
            res = batch.solve_utility(m, prices, flat[m.income], params)
        else:
            res = batch.solve_profit(m, flat[m.output_price], prices, params)
        value, X = res.value.copy(), res.quantities.copy()
        Y = None if res.output is None else res.output.copy()
        ok = res.converged.copy()
        dom = self.comp_domain
        lower = dom.lower(params, ok.size) if dom.has_bounds else None
        # points the batched Newton could not finish: one careful solve each
        tried = np.flatnonzero(~ok)[:RESCUE_LIMIT]
        for k in tried:
            F = _Fns(self.comp, tuple(float(p[k]) for p in params),
                     None if lower is None else lower[k])
            if self.kind == "spending":
                value[k], X[k], ok[k] = spending_point(F, prices[k], float(flat[m.level][k]))
            elif self.kind == "utility":
                value[k], X[k], ok[k] = utility_point(F, prices[k], float(flat[m.income][k]))
            else:
                value[k], Y[k], X[k], ok[k] = profit_point(
                    F, float(flat[m.output_price][k]), prices[k])
        extra = {"spending": m.level, "utility": m.income}.get(self.kind, m.output_price)
        # the same points, where still unsolved: a bounded solve for a corner optimum
        corner = _corners.rescue(self.kind, self.comp, prices, flat[extra], params, lower,
                                 value, X, Y, ok, tried[~ok[tried]])
        reason = self._check(flat, prices, params, value, X, Y, ok, lower)
        corner |= _corners.verify(self.kind, batch.compiled(m), prices, flat[extra], params,
                                  lower, X, reason)
        corner &= reason == code("ok")
        value[reason != code("ok")] = np.nan
        X[reason != code("ok")] = np.nan
        if Y is not None:
            Y[reason != code("ok")] = np.nan
        ys = np.full(ok.size, np.nan) if Y is None else Y
        return BatchSolution(
            value=value.reshape(shape),
            quantities=tuple(X[:, i].reshape(shape) for i in range(X.shape[1])),
            output=ys.reshape(shape), converged=ok.reshape(shape),
            iterations=res.iterations.reshape(shape), residual=res.residual.reshape(shape),
            reasons=reason.reshape(shape), corners=corner.reshape(shape))

    @property
    def comp_domain(self):
        return model_domain(self.model)

    def _check(self, flat, prices, params, value, X, Y, ok, lower) -> np.ndarray:
        """Check every returned point (inside the domain, on its constraint); give each
        point a reason code (:data:`~duality.solve.domain.REASONS`) and make every point
        that fails NaN.  Profit gets the shut-down option.  Works in place."""
        m, dom = self.model, self.comp_domain
        N = ok.size
        reason = np.where(ok, code("ok"), code("not_converged")).astype(np.int8)
        inside = dom.contains(np.where(ok[:, None], X, 1.0), params) | ~ok
        reason[~inside] = code("outside_domain")
        bcomp = batch.compiled(m)
        safe = np.where(ok[:, None] & inside[:, None], X, 1.0)
        with np.errstate(all="ignore"):
            if self.kind == "spending":
                level = flat[m.level]
                fx = bcomp.f(safe, params)
                feasible = np.abs(fx - level) <= 1e-8 * (1 + np.abs(level))
            elif self.kind == "utility":
                income = flat[m.income]
                spent = np.einsum("ij,ij->i", prices, safe)
                feasible = np.abs(spent - income) <= 1e-8 * income
            else:
                feasible = np.ones(N, dtype=bool)
        reason[ok & inside & ~feasible] = code("infeasible")
        failed = reason != code("ok")
        # why a point never converged, where that can be told
        if self.kind == "spending":
            floor = self._floor(params, N)
            reason[failed & ~ok & (flat[m.level] <= floor)] = code("below_range")
        elif self.kind == "utility" and lower is not None:
            with np.errstate(all="ignore"):
                short = flat[m.income] <= np.einsum("ij,ij->i", prices, lower)
            reason[failed & ~ok & short] = code("income_short")
        elif self.kind == "profit":
            self._shut_down(flat, prices, params, value, X, Y, reason, lower)
            failed = reason != code("ok")
        value[failed] = np.nan
        X[failed] = np.nan
        if Y is not None:
            Y[failed] = np.nan
        ok &= ~failed
        return reason

    def _floor(self, params, N) -> np.ndarray:
        """Per point, the infimum of f on the domain (−inf where it cannot be read)."""
        m = self.model
        if not params or all(np.ptp(p) == 0 for p in params):
            vals = {s: float(p[0]) for s, p in zip(self.comp.params, params)} if params \
                else {}
            fl = level_floor(m, {**m.values, **vals})
            return np.full(N, -np.inf if fl is None else fl)
        return np.full(N, -np.inf)

    def _shut_down(self, flat, prices, params, value, X, Y, reason, lower) -> None:
        """π ≥ p·f(0) when x = 0 is in the domain: a point whose interior optimum earns
        less becomes the shut-down point (y = f(0), x = 0); a point with no interior
        maximum is unavailable (the shut-down value is only a lower bound there)."""
        if lower is not None:
            return                              # x = 0 is outside the domain
        m = self.model
        N = value.size
        zero = np.zeros((N, len(m.quantities)))
        f0 = batch.compiled(m).f(zero, params)
        if not np.all(np.isfinite(f0)):
            return
        price = flat[m.output_price]
        shut = price * f0
        okk = reason == code("ok")
        down = okk & (value < shut)
        value[down], Y[down], X[down] = shut[down], f0[down], 0.0
        reason[~okk & (reason == code("not_converged"))] = code("no_interior_max")


__all__ = ["Batch", "REASONS", "CODES", "compile_model", "spending_point", "utility_point",
           "profit_point", "KKT_TOL", "SOLVER"]
