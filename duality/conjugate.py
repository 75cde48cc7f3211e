"""Convex conjugates (Legendre–Fenchel transforms) of functions of one or more variables.

:func:`conjugate` computes

    f*(p) = sup_x ( p·x − f(x) )                       (convention ``"sup"``)

or its negative, the tangent-intercept form f(x) − p·x at the tangency (convention
``"intercept"``).  Results are :class:`Conjugate` objects carrying a sympy expression
(``+oo`` outside the effective domain, written as ``Piecewise((value, cond), (oo, True))``),
the route that produced it and notes on what was checked.

Routes, tried in this order for each (separable part of the) function:

* piecewise-linear f (``Abs``, ``Max``, ``Min`` of affine pieces, with numeric
  coefficients): exact — f*(p) is the maximum of ``p*b - f(b)`` over the break points
  ``b`` on the interval between the limiting slopes, ``+oo`` outside (route ``"fenchel"``);
* polynomials with numeric coefficients: odd degree or negative leading coefficient gives
  ``+oo`` everywhere; a non-convex even polynomial goes to a numeric route that maximises
  ``p*r - f(r)`` over the real roots ``r`` of ``f'(r) = p`` (``numpy.roots``), i.e. the
  conjugate of the convex envelope;
* smooth strictly convex f (route ``"legendre"``): ``f'(x) = p`` is solved symbolically
  (within the time budget, in a worker process), the right branch is chosen by checking
  it numerically against sample points, and the boundary of the range of f' is handled
  with limits;
* multivariate: separable sums are conjugated term by term, quadratics
  ½xᵀAx + bᵀx + c in closed form, other smooth convex functions by solving ∇f = p
  symbolically, otherwise numerically (route ``"numeric"``, ``expr=None``).

Primal symbols declared ``positive`` (``nonnegative``, ``negative``, ``nonpositive``)
restrict the domain of f to that half line (f = +oo outside).
"""
from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np
import sympy as sp
from sympy.calculus.util import continuous_domain

from .budget import run_with_budget
from .errors import BudgetExceeded, DualityError
from .lambdas import numpy_function

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo


# ---------------------------------------------------------------------------------------
# result object
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Conjugate:
    """The conjugate of a function.

    Attributes
    ----------
    expr : sympy.Expr or None
        The conjugate in :attr:`variables` (and any parameters of f), already in the
        requested convention; ``+oo`` (``-oo`` for ``"intercept"``) outside the effective
        domain.  None when only a numeric evaluation exists (route ``"numeric"``).
    variables : tuple of Symbol
        The dual variables (real symbols).
    primal_variables : tuple of Symbol
        The variables of f that were conjugated.
    route : {"legendre", "fenchel", "numeric"}
        How the result was obtained: symbolic Legendre transform (solving f' = p),
        symbolic Fenchel transform (kinks, indicators, unbounded cases), or numeric.
    kind : {"legendre", "fenchel"}
        ``"legendre"`` when f is smooth and strictly convex so the conjugate is the
        classical Legendre transform; ``"fenchel"`` otherwise.
    convention : {"sup", "intercept"}
    argmax : dict
        Primal variable -> maximiser as an expression in the dual variables, where known.
    domain : sympy Set, sympy condition or None
        The effective domain (where the conjugate is finite); None means everywhere.
    notes : tuple of str
        What was found on the way (non-invertible derivatives, non-convexity, budgets).
    """

    expr: sp.Expr | None
    variables: tuple
    primal_variables: tuple
    route: str
    kind: str
    convention: str = "sup"
    argmax: dict = field(default_factory=dict)
    domain: Any = None
    notes: tuple = ()
    numeric: Callable[[np.ndarray], float] | None = field(default=None, repr=False)

    def __call__(self, **values: float) -> float:
        """Evaluate at keyword values of the dual variables (and parameters), as float.

        Returns ``inf`` outside the effective domain (``-inf`` for ``"intercept"``).
        """
        sign = 1.0 if self.convention == "sup" else -1.0
        if self.expr is None:
            missing = [str(v) for v in self.variables if str(v) not in values]
            if missing:
                raise DualityError(f"missing value(s) for {', '.join(missing)}")
            extra = set(values) - {str(v) for v in self.variables}
            if extra:
                raise DualityError(f"unknown variable(s) {', '.join(sorted(extra))}; "
                                   f"expected {', '.join(map(str, self.variables))}")
            pv = np.array([float(values[str(v)]) for v in self.variables])
            return sign * float(self.numeric(pv))
        names = {str(s): s for s in self.expr.free_symbols}
        missing = sorted(set(names) - set(values))
        if missing:
            raise DualityError(f"missing value(s) for {', '.join(missing)}")
        subs = {names[k]: sp.Float(float(v)) if not isinstance(v, sp.Basic) else v
                for k, v in values.items() if k in names}
        return _to_float(self.expr.subs(subs))

    def __repr__(self) -> str:
        ps = ", ".join(map(str, self.variables))
        star = "f*" if self.convention == "sup" else "-f*"
        body = str(self.expr) if self.expr is not None else "<numeric>"
        return (f"Conjugate({star}({ps}) = {body}; route={self.route!r}, kind={self.kind!r}"
                f", convention={self.convention!r})")


def _to_float(val) -> float:
    if val is sp.oo or val == sp.oo:
        return math.inf
    if val is sp.S.NegativeInfinity or val == -sp.oo:
        return -math.inf
    z = complex(sp.N(val, 30))
    if abs(z.imag) > 1e-9 * (1.0 + abs(z.real)):
        raise DualityError(f"the conjugate is not real here (value {z})")
    return float(z.real)


# ---------------------------------------------------------------------------------------
# internal raw result (always in the "sup" convention)
# ---------------------------------------------------------------------------------------

@dataclass
class _Raw:
    expr: sp.Expr | None
    route: str
    kind: str
    argmax: dict = field(default_factory=dict)
    domain: Any = None
    notes: list = field(default_factory=list)
    numeric: Callable[[np.ndarray], float] | None = None


# ---------------------------------------------------------------------------------------
# public entry points
# ---------------------------------------------------------------------------------------

def conjugate(f, x=None, p=None, *, convention: str = "sup",
              budget: float | None = 5.0) -> Conjugate:
    """Convex conjugate of ``f`` with respect to ``x``.

    Parameters
    ----------
    f : sympy.Expr or str
        The function.  Text is read with :func:`duality.formula.parse` (never sympify).
        A ``Piecewise((value, cond), (oo, True))`` is read as ``value`` on ``cond``.
    x : str, Symbol or sequence of them, optional
        The variables to conjugate.  Default: the single free symbol of ``f``.
    p : str, Symbol or sequence of them, optional
        Names of the dual variables.  Default ``p`` (one variable) or ``p1, p2, ...``;
        ``p_<name>`` when those clash with symbols of ``f``.
    convention : {"sup", "intercept"}
        ``"sup"``: f*(p) = sup_x (p·x − f(x)).  ``"intercept"``: −f*(p), the intercept
        f(x) − p·x of the tangent with slope p.
    budget : float or None
        Seconds allowed for symbolic solving (None: no limit, run in-process).  When
        exhausted the numeric route is used and a note says so.

    Returns
    -------
    Conjugate
    """
    if convention not in CONVENTIONS:
        raise DualityError(f"unknown convention {convention!r}; allowed values are "
                           f"{', '.join(repr(c) for c in CONVENTIONS)}")
    fexpr = _to_expr(f)
    xs, fexpr = _primal_symbols(fexpr, x)
    ps = _dual_symbols(fexpr, xs, p)
    deadline = None if budget is None else time.monotonic() + float(budget)
    raw = _conj_multi(fexpr, xs, ps, deadline)
    return _finish(raw, xs, ps, convention)


def biconjugate(f, x=None, p=None, *, budget: float | None = 5.0) -> Conjugate:
    """The conjugate of the conjugate, expressed back in the primal variables.

    Returns a :class:`Conjugate` whose :attr:`~Conjugate.variables` are the primal
    variables ``x`` (and :attr:`~Conjugate.primal_variables` the dual ones), in the
    ``"sup"`` convention.  It equals ``f`` for closed convex ``f`` and the closed convex
    envelope of ``f`` otherwise.  Univariate results whose conjugate is numeric are
    evaluated numerically (``expr=None``); multivariate ones need a symbolic conjugate.
    """
    first = conjugate(f, x, p, budget=budget)
    xs, ps = first.primal_variables, first.variables
    deadline = None if budget is None else time.monotonic() + float(budget)
    notes = list(first.notes)
    raw = None
    if first.expr is not None:
        try:
            raw = _conj_multi(first.expr, ps, xs, deadline)
        except Exception as exc:  # noqa: BLE001 - fall back to numbers
            notes.append(f"symbolic second conjugate failed ({exc}); using numeric route")
            raw = None
    if raw is None or (raw.expr is None and raw.numeric is None):
        if len(xs) != 1:
            raise DualityError("the numeric biconjugate is available for one variable only")
        fstar = first
        pname = str(ps[0])

        def num(xv, _c=fstar, _n=pname):
            return _sup_concave_1d(lambda t: float(xv[0]) * t - _c(**{_n: t}))
        raw = _Raw(None, "numeric", "fenchel", numeric=num)
    raw.notes = notes + [n for n in raw.notes if n not in notes]
    return _finish(raw, ps, xs, "sup")


# ---------------------------------------------------------------------------------------
# input handling
# ---------------------------------------------------------------------------------------

def _to_expr(f) -> sp.Expr:
    if isinstance(f, str):
        try:
            from .formula import parse
        except ImportError as exc:  # pragma: no cover - depends on the formula module
            raise DualityError("formula text needs duality.formula.parse, which is not "
                               "available; pass a sympy expression") from exc
        return parse(f)
    if isinstance(f, sp.Basic):
        return f
    if isinstance(f, (int, float)):
        return sp.sympify(f)  # a Python number, not user text
    raise DualityError(f"f must be a sympy expression or formula text, not "
                       f"{type(f).__name__}")


def _names(v) -> list[str]:
    if v is None:
        return []
    if isinstance(v, (str, sp.Symbol)):
        if isinstance(v, str) and ("," in v or " " in v.strip()):
            return [s for s in v.replace(",", " ").split() if s]
        return [str(v)]
    try:
        return [str(s) for s in v]
    except TypeError:
        raise DualityError(f"cannot read variable names from {v!r}") from None


def _working_symbol(s: sp.Symbol) -> sp.Symbol:
    """A real symbol carrying the sign assumption of ``s``."""
    for key in ("positive", "negative", "nonnegative", "nonpositive"):
        if getattr(s, f"is_{key}"):
            return sp.Symbol(s.name, **{key: True})
    return sp.Symbol(s.name, real=True)


def _primal_symbols(f: sp.Expr, x) -> tuple[tuple, sp.Expr]:
    free = sorted(f.free_symbols, key=lambda s: s.name)
    if x is None:
        if len(free) == 1:
            names = [free[0].name]
        elif not free:
            raise DualityError("f has no variables; say which variable to conjugate (x=)")
        else:
            raise DualityError("f has several symbols (" + ", ".join(s.name for s in free)
                               + "); say which to conjugate with x=")
    else:
        names = _names(x)
        if not names:
            raise DualityError("no variable to conjugate")
    if len(set(names)) != len(names):
        raise DualityError(f"variable named twice in {names}")
    by_name = {s.name: s for s in free}
    orig = []
    for n in names:
        if isinstance(x, sp.Symbol) and x.name == n:
            orig.append(by_name.get(n, x))
        else:
            orig.append(by_name.get(n, sp.Symbol(n, real=True)))
    work = tuple(_working_symbol(s) for s in orig)
    f = f.xreplace({o: w for o, w in zip(orig, work) if o != w})
    return work, f


def _dual_symbols(f: sp.Expr, xs: tuple, p) -> tuple:
    taken = {s.name for s in f.free_symbols}
    if p is None:
        names = ["p"] if len(xs) == 1 else [f"p{i + 1}" for i in range(len(xs))]
        if taken & set(names):
            names = [f"p_{s.name}" for s in xs]
    else:
        names = _names(p)
    if len(names) != len(xs):
        raise DualityError(f"{len(names)} dual name(s) {names} for {len(xs)} variable(s)")
    clash = taken & set(names)
    if clash:
        raise DualityError(f"dual variable name(s) {sorted(clash)} already used in f")
    return tuple(sp.Symbol(n, real=True) for n in names)


def _finish(raw: _Raw, xs, ps, convention) -> Conjugate:
    expr = raw.expr
    num = raw.numeric
    if num is None and expr is not None:
        num = _expr_numeric(expr, ps)
    if convention == "intercept" and expr is not None:
        expr = sp.piecewise_fold(-expr)
    return Conjugate(expr=expr, variables=tuple(ps), primal_variables=tuple(xs),
                     route=raw.route, kind=raw.kind, convention=convention,
                     argmax=dict(raw.argmax), domain=raw.domain,
                     notes=tuple(dict.fromkeys(raw.notes)), numeric=num)


def _expr_numeric(expr, ps):
    extra = expr.free_symbols - set(ps)
    if extra:
        return None

    def num(pv, _e=expr, _ps=tuple(ps)):
        return _to_float(_e.subs({s: sp.Float(float(v)) for s, v in zip(_ps, pv)}))
    return num


def _remaining(deadline):
    if deadline is None:
        return None
    return deadline - time.monotonic()


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
                    if rem is None or rem > 0 else _raise_budget()
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
    from scipy.optimize import minimize
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


# ---------------------------------------------------------------------------------------
# one variable
# ---------------------------------------------------------------------------------------

def _symbol_interval(x: sp.Symbol) -> sp.Interval:
    if x.is_positive:
        return sp.Interval.open(0, oo)
    if x.is_nonnegative:
        return sp.Interval(0, oo)
    if x.is_negative:
        return sp.Interval.open(-oo, 0)
    if x.is_nonpositive:
        return sp.Interval(-oo, 0)
    return sp.Interval(-oo, oo)


def _effective(f, x):
    """Read ``Piecewise((v, cond), ..., (oo, True))`` as (value, interval); else (f, R)."""
    if not isinstance(f, sp.Piecewise) or f.args[-1] != (sp.oo, True):
        return f, sp.S.Reals
    xr = sp.Symbol(x.name, real=True)
    pairs = [(e.xreplace({x: xr}), c.xreplace({x: xr})) for e, c in f.args[:-1]]
    sets = []
    for e, c in pairs:
        try:
            sets.append(c.as_set() if c is not sp.true else sp.S.Reals)
        except Exception:  # noqa: BLE001
            raise DualityError(f"cannot read the domain condition {c}") from None
    main = [i for i, s in enumerate(sets) if not isinstance(s, sp.FiniteSet)]
    if len(main) != 1 or not isinstance(sets[main[0]], sp.Interval):
        raise DualityError("a piecewise function with several pieces is not supported "
                           "symbolically")
    dom = sets[main[0]]
    for i, s in enumerate(sets):
        if i != main[0]:
            for pt in s:
                if pt in (dom.start, dom.end):
                    dom = dom.union(sp.FiniteSet(pt))
    return pairs[main[0]][0].xreplace({xr: x}), dom


def _natural_domain(val, x):
    """The interval where ``val`` is real and continuous (log x, sqrt x need x > 0 / >= 0)."""
    xr = sp.Symbol(x.name, real=True)
    try:
        nat = continuous_domain(val.xreplace({x: xr}), xr, sp.S.Reals)
    except Exception:  # noqa: BLE001 - no inference: keep the declared domain
        return sp.S.Reals
    return nat if isinstance(nat, sp.Interval) else sp.S.Reals


def _conj1_any(f, x, p, deadline) -> _Raw:
    val, dom = _effective(f, x)
    dom = dom.intersect(_symbol_interval(x))
    nat = _natural_domain(val, x)
    natural_note = None
    if nat != sp.S.Reals and not dom.is_subset(nat):
        dom = dom.intersect(nat)
        natural_note = (f"f is defined only for {x} in {nat} (its natural domain); it is "
                        "taken as +oo outside")
    if dom is sp.S.EmptySet:
        raise DualityError(f"f is +oo everywhere (empty domain for {x})")
    if not isinstance(dom, sp.Interval):
        if dom == sp.S.Reals:
            dom = sp.Interval(-oo, oo)
        else:
            raise DualityError(f"domain {dom} of {x} is not an interval")
    # work with a symbol carrying the interior's sign
    lo, hi = dom.start, dom.end
    if lo == 0 and hi == oo:
        xw = sp.Symbol(x.name, positive=True)
    elif lo == -oo and hi == 0:
        xw = sp.Symbol(x.name, negative=True)
    else:
        xw = sp.Symbol(x.name, real=True)
    val = val.xreplace({x: xw})
    raw = _conj1(val, xw, p, dom, deadline)
    raw.argmax = {x: v for k, v in raw.argmax.items()}
    if natural_note:
        raw.notes = [natural_note] + list(raw.notes)
    return raw


def _conj1(f, x, p, dom, deadline) -> _Raw:
    f = sp.piecewise_fold(f) if f.has(sp.Piecewise) else f
    # piecewise linear (includes affine and constants)
    bps = _pl_breakpoints(f, x)
    if bps is not None:
        return _pl_conjugate(f, x, p, dom, bps)
    notes = []
    params = f.free_symbols - {x}
    if f.has(sp.Abs, sp.Max, sp.Min, sp.sign, sp.Heaviside, sp.Piecewise):
        notes.append("f has kinks or pieces that are not piecewise linear; numeric route")
        return _numeric1(f, x, p, dom, notes)
    poly = None
    if not params and dom == sp.Interval(-oo, oo):
        try:
            poly = sp.Poly(f, x)
        except sp.PolynomialError:
            poly = None
    f1 = sp.diff(f, x)
    f2 = sp.diff(f, x, 2)
    if poly is not None:
        deg = poly.degree()
        lead = poly.LC()
        f2_roots = sorted(set(sp.real_roots(sp.Poly(f2, x)))) if deg > 2 else []
        neg = sp.solve_univariate_inequality(f2 < 0, x, relational=False) \
            if deg > 2 else (sp.S.Reals if f2 < 0 else sp.S.EmptySet)
        convex = neg is sp.S.EmptySet
        if not convex:
            notes.append(f"f'(x) = {f1} is not invertible: f'' = {f2} changes sign "
                         f"(f'' = 0 at x = {', '.join(map(str, f2_roots))})"
                         if f2_roots else f"f'(x) = {f1} is not invertible")
            try:
                where = str(neg.as_relational(x))
            except Exception:  # noqa: BLE001 - fall back to the set
                where = f"x in {neg}"
            notes.append(f"f is not convex (f''(x) < 0 for {where})")
        elif f2_roots:
            notes.append(f"f'' = 0 at x = {', '.join(map(str, f2_roots))} but f' is still "
                         f"strictly increasing (invertible)")
        if deg % 2 == 1 or lead < 0:
            why = "odd degree" if deg % 2 == 1 else "negative leading coefficient"
            notes.append(f"p·x − f(x) is unbounded above ({why}), so f*(p) = +oo for "
                         f"every p")
            return _Raw(sp.oo, "fenchel", "fenchel", {}, sp.S.EmptySet, notes)
        if not convex:
            notes.append("the result is the conjugate of the convex envelope of f, "
                         "computed numerically as the maximum of p·r − f(r) over the "
                         "real roots r of f'(r) = p")
            return _Raw(None, "numeric", "fenchel", {}, None, notes,
                        _poly_numeric(poly))
        notes.append("f is a convex polynomial")
    else:
        # convexity check
        conv = _convexity(f2, x, dom, params)
        if conv is not True and conv is not None:
            notes.append(f"f is not convex (f''(x) < 0 at x = {conv:.4g}); the result is "
                         f"the conjugate of its convex envelope, computed numerically")
            return _numeric1(f, x, p, dom, notes)
        if conv is None:
            notes.append("convexity of f could not be verified; assumed")
    rem = _remaining(deadline)
    try:
        if rem is not None and rem <= 0:
            raise BudgetExceeded("no time left")
        res = run_with_budget(_legendre_worker, f, x, p, dom, budget=rem)
    except BudgetExceeded:
        notes.append("the time budget for the symbolic Legendre transform was exhausted; "
                     "numeric route used")
        return _numeric1(f, x, p, dom, notes)
    except Exception as exc:  # noqa: BLE001 - sympy fails in many ways
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        notes.append(f"symbolic Legendre transform failed ({msg}); numeric route used")
        return _numeric1(f, x, p, dom, notes)
    expr, argmax, domain, wnotes = res
    return _Raw(expr, "legendre", "legendre", argmax, domain, notes + wnotes)


def _convexity(f2, x, dom, params):
    """True (f'' >= 0 shown), a float x with f''(x) < 0, or None (unknown)."""
    if f2.is_nonnegative:
        return True
    if params:
        return None
    pts = _samples1(dom, 60)
    fn = numpy_function(x, f2)
    try:
        with np.errstate(all="ignore"):
            vals = np.array([complex(fn(t)) for t in pts])
    except Exception:  # noqa: BLE001 - cannot sample f''
        return None
    bad = np.nonzero(vals.real < -1e-10)[0]
    if bad.size:
        return float(pts[int(bad[0])])
    return True


def _samples1(dom, n=9):
    lo, hi = dom.start, dom.end
    if lo == -oo and hi == oo:
        return list(np.linspace(-4.0, 4.0, n) + 0.013)
    if lo == -oo:
        h = float(hi)
        return list(h - np.geomspace(0.05, 8.0, n))
    if hi == oo:
        l_ = float(lo)
        return list(l_ + np.geomspace(0.05, 8.0, n))
    a, b = float(lo), float(hi)
    return list(np.linspace(a, b, n + 2)[1:-1])


def _param_values(params):
    vals = {}
    for i, s in enumerate(sorted(params, key=lambda s: s.name)):
        v = 1.37 + 0.29 * i
        vals[s] = -v if (s.is_negative or s.is_nonpositive) else v
    return vals


def _legendre_worker(f, x, p, dom):
    """Solve f'(x) = p, pick the branch, assemble the Piecewise.  Runs in a worker."""
    f1 = sp.diff(f, x)
    params = f.free_symbols - {x}
    pv = _param_values(params)
    notes = []
    xs_pts = _samples1(dom, 7)
    f1n = numpy_function(x, f1.subs(pv))

    def check(cand, pts):
        for t in pts:
            pk = float(f1n(t))
            try:
                z = complex(sp.N(cand.subs(pv).subs(p, pk)))
            except (TypeError, ValueError):
                return False
            if not abs(z - t) <= 1e-6 * (1 + abs(t)):
                return False
        return True

    pr = sp.Symbol(p.name, real=True)
    cands = sp.solve(sp.Eq(f1, pr), x)
    cands = [c.xreplace({pr: p}) for c in cands if not c.has(x)]
    good = [c for c in cands if check(c, xs_pts)]
    lo_x, hi_x = dom.start, dom.end
    if good:
        xstar = good[0]
        val = sp.simplify(p * xstar - f.subs(x, xstar))
    else:
        # split at an interior point x0 into the two sides x = x0 ± y, y > 0
        x0 = _interior_point(dom)
        c = sp.simplify(f1.subs(x, x0))
        y = sp.Symbol("_y", positive=True)
        q = sp.Symbol("_q", positive=True)
        sides = []
        for sgn in (1, -1):
            pts = [t for t in xs_pts if sgn * (t - x0) > 0]
            sol = sp.solve(sp.Eq(f1.subs(x, x0 + sgn * y), c + sgn * q), y)
            ok = None
            for s in sol:
                cand = x0 + sgn * s.xreplace({q: sgn * (p - c)})
                if check(cand, pts):
                    ok = s
                    break
            if ok is None:
                raise DualityError(f"no branch of the solution of f'(x) = p "
                                   f"({f1} = {p}) matched the sample points")
            vq = sp.simplify((c + sgn * q) * (x0 + sgn * ok) - f.subs(x, x0 + sgn * ok))
            sides.append((ok, vq))
        (yh, vh), (yl, vl) = sides
        notes.append(f"f'(x) = p solved separately for x > {x0} and x < {x0}")
        qabs = sp.Abs(p - c)
        if sp.simplify(vh - vl) == 0:
            val = vh.xreplace({q: qabs})
        else:
            val = sp.Piecewise((vh.xreplace({q: p - c}), p > c),
                               (vl.xreplace({q: c - p}), True))
        if sp.simplify(yh - yl) == 0:
            xstar = x0 + sp.sign(p - c) * yh.xreplace({q: qabs})
        else:
            xstar = sp.Piecewise((x0 + yh.xreplace({q: p - c}), p > c),
                                 (x0 - yl.xreplace({q: c - p}), True))
    # range of f' and boundary behaviour
    plo = sp.limit(f1, x, lo_x, "+") if lo_x != -oo else sp.limit(f1, x, -oo)
    phi = sp.limit(f1, x, hi_x, "-") if hi_x != oo else sp.limit(f1, x, oo)
    pieces = []
    conds = []
    if plo.is_finite:
        conds.append(p > plo)
    if phi.is_finite:
        conds.append(p < phi)
    main_cond = sp.And(*conds) if conds else sp.true
    pieces.append((val, main_cond))
    dstart, dend, lopen, ropen = plo, phi, True, True
    for end_x, end_p, side in ((lo_x, plo, "lo"), (hi_x, phi, "hi")):
        if not end_p.is_finite:
            continue
        rel = (p <= end_p) if side == "lo" else (p >= end_p)
        if end_x.is_finite:
            fl = sp.limit(f, x, end_x, "+" if side == "lo" else "-")
            if fl.is_finite:
                pieces.append((sp.simplify(p * end_x - fl), rel))
                notes.append(f"for {rel} the supremum is approached at the boundary "
                             f"x = {end_x}")
                if side == "lo":
                    dstart, lopen = -oo, True
                else:
                    dend, ropen = oo, True
                continue
        lim = sp.limit(val, p, end_p, "+" if side == "lo" else "-")
        if lim.is_finite:
            pieces.append((lim, sp.Eq(p, end_p)))
            if side == "lo":
                lopen = False
            else:
                ropen = False
    if len(pieces) == 1 and pieces[0][1] is sp.true:
        expr = val
        domain = None
    else:
        expr = sp.Piecewise(*pieces, (sp.oo, True))
        domain = sp.Interval(dstart, dend, lopen, ropen)
        if domain == sp.Interval(-oo, oo):
            domain = None
    if f.free_symbols - {x}:
        notes.append("branch of f'(x) = p chosen at sample parameter values "
                     + ", ".join(f"{k}={v}" for k, v in pv.items()))
    return expr, {x: xstar}, domain, notes


def _interior_point(dom):
    lo, hi = dom.start, dom.end
    if lo <= 0 <= hi and lo != 0 and hi != 0:
        return sp.S.Zero
    if lo == -oo:
        return hi - 1
    if hi == oo:
        return lo + 1
    return (lo + hi) / 2


def _poly_numeric(poly: sp.Poly):
    coeffs = [float(c) for c in poly.all_coeffs()]
    fpoly = np.poly1d(coeffs)
    d = np.polyder(fpoly)

    def num(pv, _f=fpoly, _d=d):
        pval = float(np.asarray(pv).ravel()[0])
        c = _d.coeffs.copy()
        c[-1] -= pval
        r = np.roots(c)
        tol = 1e-7 * (1 + np.abs(r))
        real = r[np.abs(r.imag) <= tol].real
        if real.size == 0:
            real = r[np.argmin(np.abs(r.imag))].real[None]
        # polish the roots with Newton steps on f'(x) = p
        dd = np.polyder(_d)
        for _ in range(3):
            g = _d(real) - pval
            h = dd(real)
            step = np.where(np.abs(h) > 1e-14, g / np.where(h == 0, 1, h), 0.0)
            real = real - step
        return float(np.max(pval * real - _f(real)))
    return num


def _numeric1(f, x, p, dom, notes) -> _Raw:
    if f.free_symbols - {x}:
        raise DualityError("the numeric route needs values for the parameters "
                           f"{', '.join(sorted(map(str, f.free_symbols - {x})))}")
    fn = numpy_function(x, f)
    lo = float(dom.start)
    hi = float(dom.end)

    def num(pv, _fn=fn):
        pval = float(np.asarray(pv).ravel()[0])

        def h(t):
            with np.errstate(all="ignore"):
                v = pval * t - _fn(t)
            v = np.asarray(v, dtype=float)
            return np.where(np.isfinite(v), v, -np.inf)
        best = -np.inf
        prev = None
        for R in (10.0, 100.0, 1000.0, 1e4):
            a = max(lo, -R)
            b = min(hi, R)
            eps = 1e-12 * max(1.0, abs(a), abs(b))
            grid = np.linspace(a + (eps if a == lo else 0), b - (eps if b == hi else 0),
                               4001)
            vals = h(grid)
            k = int(np.argmax(vals))
            best = float(vals[k])
            at_edge = (k == 0 and a > lo) or (k == grid.size - 1 and b < hi)
            if not at_edge:
                from scipy.optimize import minimize_scalar
                l_ = grid[max(k - 1, 0)]
                r_ = grid[min(k + 1, grid.size - 1)]
                if r_ > l_:
                    res = minimize_scalar(lambda t: -float(h(t)), bounds=(l_, r_),
                                          method="bounded",
                                          options={"xatol": 1e-12})
                    best = max(best, -float(res.fun))
                return best
            prev = best
        return math.inf if prev is not None and np.isfinite(prev) else best
    notes = list(notes) + ["numeric route: sup of p·x − f(x) by grid search and bounded "
                           "refinement (windows up to |x| ≤ 1e4)"]
    return _Raw(None, "numeric", "fenchel", {}, None, notes, num)


def _sup_concave_1d(h):
    """sup over t of a concave function h (may be -inf); inf if it keeps growing."""
    from scipy.optimize import minimize_scalar

    def hv(t):
        v = h(float(t))
        return v if not math.isnan(v) else -math.inf
    for R in (4.0, 16.0, 64.0, 256.0, 1024.0):
        grid = np.linspace(-R, R, 801)
        vals = np.array([hv(t) for t in grid])
        k = int(np.argmax(vals))
        if 0 < k < grid.size - 1:
            res = minimize_scalar(lambda t: -hv(t), bounds=(grid[k - 1], grid[k + 1]),
                                  method="bounded", options={"xatol": 1e-12})
            return max(float(vals[k]), -float(res.fun))
    return math.inf


# ---------------------------------------------------------------------------------------
# piecewise-linear functions
# ---------------------------------------------------------------------------------------

_KINKS = (sp.Abs, sp.Max, sp.Min)


def _pl_breakpoints(f, x):
    """Break points of f if f is piecewise linear in x with numeric coefficients."""
    if f.free_symbols - {x}:
        return None
    if not f.has(x):
        return set()
    if isinstance(f, sp.Add):
        out = set()
        for t in f.args:
            b = _pl_breakpoints(t, x)
            if b is None:
                return None
            out |= b
        return out
    if isinstance(f, sp.Mul):
        dep = [a for a in f.args if a.has(x)]
        if len(dep) != 1:
            return None
        return _pl_breakpoints(dep[0], x)
    if isinstance(f, _KINKS):
        out = set()
        for a in f.args:
            b = _pl_breakpoints(a, x)
            if b is None:
                return None
            out |= b
        if isinstance(f, sp.Abs):
            diffs = [f.args[0]]
        else:
            diffs = [a - b for i, a in enumerate(f.args) for b in f.args[i + 1:]]
        for g in diffs:
            out |= _pl_zeros(g, x, out)
        return out
    if f == x:
        return set()
    return None


def _pl_zeros(g, x, bps):
    pts = sorted(bps)
    edges = [-oo] + pts + [oo]
    zeros = set()
    for a, b in zip(edges[:-1], edges[1:]):
        if a == -oo and b == oo:
            t1, t2 = sp.S.Zero, sp.S.One
        elif a == -oo:
            t1, t2 = b - 2, b - 1
        elif b == oo:
            t1, t2 = a + 1, a + 2
        else:
            t1, t2 = a, b
        g1, g2 = g.subs(x, t1), g.subs(x, t2)
        if g1 == g2:
            continue
        r = sp.nsimplify(t1 - g1 * (t2 - t1) / (g2 - g1))
        if a <= r <= b:
            zeros.add(r)
    return zeros


def _pl_conjugate(f, x, p, dom, bps) -> _Raw:
    lo, hi = dom.start, dom.end
    cands = sorted(b for b in bps if lo <= b <= hi)
    for e in (lo, hi):
        if e.is_finite and e not in cands:
            cands.append(e)
    cands = sorted(set(cands))
    fv = lambda t: sp.nsimplify(f.subs(x, t))  # noqa: E731
    notes = []
    ref = cands or [sp.S.Zero]
    s_minus = s_plus = None
    if lo == -oo:
        A = min(ref) - 1
        s_minus = fv(A) - fv(A - 1)
    if hi == oo:
        B = max(ref) + 1
        s_plus = fv(B + 1) - fv(B)
    # convexity of the piecewise linear function: slopes non-decreasing
    seg_pts = [cands[0] - 1] + cands + [cands[-1] + 1] if cands else [0, 1]
    slopes = [(fv(b) - fv(a)) / (b - a) for a, b in zip(seg_pts[:-1], seg_pts[1:])
              if a != b]
    convex = all(s2 >= s1 for s1, s2 in zip(slopes[:-1], slopes[1:]))
    if not convex:
        notes.append("f is piecewise linear but not convex; the result is the conjugate of "
                     "its convex envelope")
    if not cands:  # affine on the whole line
        c = fv(0)
        notes.append(f"f is affine with slope {s_plus}: f* is the indicator of "
                     f"{{{s_plus}}} shifted by {-c}")
        expr = sp.Piecewise((-c, sp.Eq(p, s_plus)), (sp.oo, True))
        return _Raw(expr, "fenchel", "fenchel", {}, sp.FiniteSet(s_plus), notes)
    if s_minus is not None and s_plus is not None and s_minus > s_plus:
        notes.append(f"the slopes at −∞ ({s_minus}) exceed those at +∞ ({s_plus}): "
                     f"p·x − f(x) is unbounded above for every p")
        return _Raw(sp.oo, "fenchel", "fenchel", {}, sp.S.EmptySet, notes)
    val = sp.Max(*[p * b - fv(b) for b in cands])
    conds = []
    if s_minus is not None:
        conds.append(p >= s_minus)
    if s_plus is not None:
        conds.append(p <= s_plus)
    notes.append("f is piecewise linear: f*(p) = max over the break points b of "
                 "p·b − f(b), finite between the limiting slopes")
    if conds:
        expr = sp.Piecewise((val, sp.And(*conds)), (sp.oo, True))
        domain = sp.Interval(s_minus if s_minus is not None else -oo,
                             s_plus if s_plus is not None else oo)
    else:
        expr, domain = val, None
    return _Raw(expr, "fenchel", "fenchel", {}, domain, notes)


__all__ = ["Conjugate", "conjugate", "biconjugate", "CONVENTIONS", "ROUTES", "KINDS"]
