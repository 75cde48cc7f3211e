"""Several variables: separable sums, quadratics, smooth convex functions, numeric."""
from __future__ import annotations

import math

import numpy as np
import sympy as sp
from scipy.optimize import minimize

from ..solve.budget import run_with_budget
from ..errors import BudgetExceeded, DualityError
from ..model.lambdas import numpy_function
from .common import _Raw, _expr_numeric, _remaining
from .univariate import _conj1_any

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo



# ---------------------------------------------------------------------------------------
# multivariate dispatch
# ---------------------------------------------------------------------------------------

def _conj_multi(f, xs, ps, deadline) -> _Raw:
    if len(xs) == 1:
        return _conj1_any(f, xs[0], ps[0], deadline)
    # separable?
    groups = _separate(f, xs)
    if groups is not None:
        return _combine_separable(groups, xs, ps, deadline)
    quad = _quadratic(f, xs, ps)
    if quad is not None:
        return quad
    return _smooth_multi(f, xs, ps, deadline)


def _separate(f, xs):
    """Split f = c + Σ g_i(x_i); None when some term mixes variables."""
    f = sp.expand(f) if isinstance(f, sp.Add) or f.is_polynomial(*xs) else f
    terms = sp.Add.make_args(f)
    groups = {x: sp.S.Zero for x in xs}
    const = sp.S.Zero
    for t in terms:
        inv = [x for x in xs if t.has(x)]
        if len(inv) > 1:
            return None
        if inv:
            groups[inv[0]] += t
        else:
            const += t
    return groups, const


def _combine_separable(sep, xs, ps, deadline) -> _Raw:
    groups, const = sep
    parts = []
    for x, p in zip(xs, ps):
        parts.append(_conj1_any(groups[x], x, p, deadline))
    notes = []
    for x, r in zip(xs, parts):
        notes += [f"[{x}] {n}" for n in r.notes]
    notes.append("f is separable: f*(p) is the sum of the conjugates of its terms")
    kind = "legendre" if all(r.kind == "legendre" for r in parts) else "fenchel"
    argmax = {}
    for r in parts:
        argmax.update(r.argmax)
    doms = [r.domain for r in parts]
    domain = None
    if any(d is not None for d in doms):
        sets = [d if d is not None else sp.S.Reals for d in doms]
        domain = sp.ProductSet(*sets)
    if all(r.expr is not None for r in parts):
        expr = sp.Add(*[r.expr for r in parts]) - const
        route = "legendre" if all(r.route == "legendre" for r in parts) else "fenchel"
        return _Raw(expr, route, kind, argmax, domain, notes)
    nums = []
    for r, p in zip(parts, ps):
        n = r.numeric if r.expr is None else _expr_numeric(r.expr, (p,))
        if n is None:
            raise DualityError("parameters must have values for the numeric route")
        nums.append(n)
    c = float(const) if const.free_symbols == set() else None
    if c is None:
        raise DualityError("parameters must have values for the numeric route")

    def num(pv, _nums=tuple(nums), _c=c):
        return sum(n(np.array([v])) for n, v in zip(_nums, pv)) - _c
    return _Raw(None, "numeric", kind, argmax, domain, notes, num)


def _quadratic(f, xs, ps) -> _Raw | None:
    try:
        poly = sp.Poly(f, *xs)
    except sp.PolynomialError:
        return None
    if poly.total_degree() > 2:
        return None
    if any(x.is_positive or x.is_negative or x.is_nonnegative or x.is_nonpositive
           for x in xs):
        return None
    zero = {x: 0 for x in xs}
    A = sp.hessian(f, xs).subs(zero)
    b = sp.Matrix([sp.diff(f, x).subs(zero) for x in xs])
    c = f.subs(zero)
    P = sp.Matrix(ps)
    notes = ["f is quadratic ½xᵀAx + bᵀx + c: f*(p) = ½(p−b)ᵀA⁻¹(p−b) − c"]
    pd = A.is_positive_definite
    if pd:
        Ainv = A.inv()
        d = P - b
        expr = sp.simplify((d.T * Ainv * d)[0, 0] / 2 - c)
        xstar = Ainv * d
        argmax = {x: sp.simplify(xstar[i]) for i, x in enumerate(xs)}
        return _Raw(expr, "legendre", "legendre", argmax, None, notes)
    if A.free_symbols:
        return None
    ev = [complex(e) for e in np.linalg.eigvalsh(np.array(A.evalf(), dtype=float))]
    if min(e.real for e in ev) < -1e-12:
        notes = [f"f is a quadratic with an indefinite Hessian {A.tolist()}: "
                 f"p·x − f(x) is unbounded above, so f*(p) = +oo for every p"]
        return _Raw(sp.oo, "fenchel", "fenchel", {}, sp.S.EmptySet, notes)
    # positive semidefinite and singular: finite on b + range(A)
    Apinv = A.pinv()
    d = P - b
    conds = [sp.Eq(sp.expand((v.T * d)[0, 0]), 0) for v in A.nullspace()]
    val = sp.simplify((d.T * Apinv * d)[0, 0] / 2 - c)
    cond = sp.And(*conds)
    notes = ["f is quadratic with a singular positive semidefinite Hessian: f* is finite "
             "only for p − b in the range of A (pseudo-inverse formula)"]
    return _Raw(sp.Piecewise((val, cond), (sp.oo, True)), "fenchel", "fenchel", {},
                cond, notes)


def _smooth_multi(f, xs, ps, deadline) -> _Raw:
    notes = []
    free = f.free_symbols - set(xs)
    if not free:
        grad = [sp.diff(f, x) for x in xs]
        H = sp.hessian(f, xs)
        samples = _multi_samples(xs)
        hf = numpy_function(xs, H)
        for pt in samples:
            eig = np.linalg.eigvalsh(np.array(hf(*pt), dtype=float))
            if eig.min() <= 0:
                notes.append(f"the Hessian of f is not positive definite at x = "
                             f"{tuple(round(v, 4) for v in pt)}; the numeric route "
                             f"maximises p·x − f(x) locally")
                break
        else:
            rem = _remaining(deadline)
            try:
                sols = run_with_budget(_solve_worker, grad, xs, ps, budget=rem) \
                    if rem is None or not rem.exhausted else _raise_budget()
            except BudgetExceeded:
                sols = None
                notes.append("the time budget for solving ∇f(x) = p symbolically was "
                             "exhausted; numeric route used")
            except Exception as exc:  # noqa: BLE001 - sympy may fail in many ways
                sols = None
                notes.append(f"sympy could not solve ∇f(x) = p ({type(exc).__name__})")
            if sols:
                good = _pick_multi(sols, f, xs, ps, samples)
                if good is not None:
                    expr = sum(p * good[x] for x, p in zip(xs, ps)) - f.subs(good)
                    notes.append("Hessian positive definite at sample points; ∇f(x) = p "
                                 "solved symbolically (valid where the solution is real)")
                    return _Raw(sp.simplify(expr), "legendre", "legendre", good, None,
                                notes)
            if sols is not None:
                notes.append("no symbolic solution of ∇f(x) = p matched the sample "
                             "points; numeric route used")
        return _numeric_multi(f, xs, ps, notes)
    raise DualityError("f is not separable, not quadratic and has parameters "
                       f"({', '.join(sorted(map(str, free)))}); give them values")


def _raise_budget():
    raise BudgetExceeded("no time left in the budget")


def _solve_worker(grad, xs, ps):
    eqs = [g - p for g, p in zip(grad, ps)]
    return sp.solve(eqs, list(xs), dict=True)


def _multi_samples(xs):
    rng = np.random.default_rng(12345)
    pts = []
    for _ in range(6):
        pt = []
        for x in xs:
            if x.is_positive or x.is_nonnegative:
                pt.append(float(rng.uniform(0.2, 3.0)))
            elif x.is_negative or x.is_nonpositive:
                pt.append(float(-rng.uniform(0.2, 3.0)))
            else:
                pt.append(float(rng.uniform(-2.0, 2.0)))
        pts.append(pt)
    return pts


def _pick_multi(sols, f, xs, ps, samples):
    grad = numpy_function(xs, [sp.diff(f, x) for x in xs])
    for sol in sols:
        if set(sol) != set(xs):
            continue
        ok = True
        for pt in samples:
            pv = [float(v) for v in grad(*pt)]
            for x, v in zip(xs, pt):
                try:
                    z = complex(sp.N(sol[x].subs(dict(zip(ps, pv)))))
                except (TypeError, ValueError):
                    ok = False
                    break
                if abs(z - v) > 1e-6 * (1 + abs(v)):
                    ok = False
                    break
            if not ok:
                break
        if ok:
            return sol
    return None


def _numeric_multi(f, xs, ps, notes) -> _Raw:
    fn = numpy_function([xs], f)
    gr = numpy_function([xs], [sp.diff(f, x) for x in xs])
    bounds = []
    x0 = []
    for x in xs:
        if x.is_positive or x.is_nonnegative:
            bounds.append((1e-12 if x.is_positive else 0.0, None))
            x0.append(1.0)
        elif x.is_negative or x.is_nonpositive:
            bounds.append((None, -1e-12 if x.is_negative else 0.0))
            x0.append(-1.0)
        else:
            bounds.append((None, None))
            x0.append(0.0)
    constrained = any(b != (None, None) for b in bounds)

    def num(pv, _fn=fn, _gr=gr):
        pv = np.asarray(pv, dtype=float)

        def obj(z):
            with np.errstate(all="ignore"):
                v = float(_fn(z)) - float(pv @ z)
            return v if np.isfinite(v) else 1e300

        def jac(z):
            return np.asarray(_gr(z), dtype=float) - pv
        kw = dict(jac=jac, tol=1e-12)
        if constrained:
            res = minimize(obj, np.array(x0), method="L-BFGS-B", bounds=bounds, **kw)
        else:
            res = minimize(obj, np.array(x0), method="BFGS", **kw)
        if res.fun < -1e12 or np.linalg.norm(res.x) > 1e8:
            return math.inf
        return -float(res.fun)
    notes = list(notes) + ["numeric route: p·x − f(x) maximised with scipy.optimize "
                           "(analytic gradient) for each p"]
    return _Raw(None, "numeric", "fenchel", {}, None, notes, num)


