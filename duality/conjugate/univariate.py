"""One variable: Legendre transform of smooth functions, polynomials, numeric."""
from __future__ import annotations

import math

import numpy as np
import sympy as sp
from scipy.optimize import minimize_scalar
from sympy.calculus.util import continuous_domain

from ..solve.budget import run_with_budget
from ..errors import BudgetExceeded, DualityError
from ..model.lambdas import numpy_function
from .common import _Raw, _remaining
from .piecewise import _pl_breakpoints, _pl_conjugate

CONVENTIONS = ("sup", "intercept")
ROUTES = ("legendre", "fenchel", "numeric")
KINDS = ("legendre", "fenchel")

oo = sp.oo



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
    if isinstance(nat, sp.Union) and all(isinstance(a, sp.Interval) for a in nat.args):
        return nat
    return nat if isinstance(nat, sp.Interval) else sp.S.Reals


def _falls_without_bound(val, x, pieces) -> str | None:
    """Where f → −oo at a finite end of one of the intervals of its domain (a pole such
    as 1/x at 0 from below), then p·x − f(x) → +oo there for every p; that end, else None."""
    xr = sp.Symbol(x.name, real=True)
    v = val.xreplace({x: xr})
    for piece in pieces:
        for end, side in ((piece.start, "+"), (piece.end, "-")):
            if not end.is_finite:
                continue
            try:
                lim = sp.limit(v, xr, end, side)
            except Exception:  # noqa: BLE001 - unknown behaviour: not claimed
                continue
            if lim == -sp.oo:
                return f"{x} → {end}{'⁺' if side == '+' else '⁻'}"
    return None


def _conj1_any(f, x, p, deadline) -> _Raw:
    val, dom = _effective(f, x)
    dom = dom.intersect(_symbol_interval(x))
    nat = _natural_domain(val, x)
    natural_note = None
    if isinstance(nat, sp.Union):
        pieces = [a.intersect(dom) for a in nat.args]
        pieces = [a for a in pieces if isinstance(a, sp.Interval)]
        where = _falls_without_bound(val, x, pieces)
        if where is not None:
            return _Raw(sp.oo, "fenchel", "fenchel", {}, sp.S.EmptySet,
                        [f"f is defined for {x} in {nat}; f → −oo as {where}, so p·x − f(x) "
                         "is unbounded above and f*(p) = +oo for every p"])
        if len(pieces) == 1:
            nat = pieces[0]
        else:
            raise DualityError(f"f is defined for {x} in {nat}, not one interval; declare "
                               f"the sign of {x} (e.g. positive) to choose one piece")
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
        if rem is not None and rem.exhausted:
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
                l_ = grid[max(k - 1, 0)]
                r_ = grid[min(k + 1, grid.size - 1)]
                if r_ > l_:
                    res = minimize_scalar(lambda t: -float(h(t)), bounds=(l_, r_),
                                          method="bounded",
                                          options={"xatol": 1e-12})
                    best = max(best, -float(res.fun))
                # the supremum may be approached at an open end of the domain
                if k == 0 and a == lo:
                    best = max(best, _edge_limit(h, f, x, pval, lo, +1))
                if k == grid.size - 1 and b == hi:
                    best = max(best, _edge_limit(h, f, x, pval, hi, -1))
                return best
        # still rising at the widest window: the limit towards that infinite end decides
        end = -math.inf if k == 0 else math.inf
        return max(best, _edge_limit(h, f, x, pval, end, +1 if k == 0 else -1))
    notes = list(notes) + ["numeric route: sup of p·x − f(x) by grid search and bounded "
                           "refinement (windows up to |x| ≤ 1e4); where the supremum lies "
                           "at an end of the domain, the limit of p·x − f(x) there "
                           "(+oo when unbounded, never a window's bound)"]
    return _Raw(None, "numeric", "fenchel", {}, None, notes, num)


def _edge_limit(h, f, x, pval, end, side) -> float:
    """lim p·x − f(x) as x approaches ``end`` from inside the domain (``side`` +1: from
    above, −1: from below): read off a geometric sequence of points when it settles or
    explodes, else by sympy's limit; +inf when unbounded."""
    if math.isinf(end):
        ts = np.sign(end) * 10.0 ** np.arange(4.0, 301.0, 4.0)
    else:
        scale = max(1.0, abs(end))
        ts = end + side * scale * 10.0 ** -np.arange(4.0, 301.0, 4.0)
        ts = ts[ts != end]
    with np.errstate(all="ignore"):
        vals = np.asarray(h(ts), dtype=float)
    vals = vals[np.isfinite(vals)]
    if vals.size >= 3:
        if vals[-1] > 1e100 or (vals[-1] > 1e12 and np.all(np.diff(vals[-4:]) > 0)):
            return math.inf
        if abs(vals[-1] - vals[-2]) <= 1e-12 * (1 + abs(vals[-1])) and \
                abs(vals[-2] - vals[-3]) <= 1e-9 * (1 + abs(vals[-1])):
            return float(vals[-1])
    try:
        expr = sp.Float(pval) * x - f
        point = sp.oo if end == math.inf else (-sp.oo if end == -math.inf else sp.Float(end))
        lim = sp.limit(expr, x, point, "+" if side > 0 else "-")
        if lim == sp.oo:
            return math.inf
        if lim.is_real and lim.is_finite:
            return float(lim)
    except Exception:  # noqa: BLE001 - sympy cannot take the limit: the points decide
        pass
    return float(vals[-1]) if vals.size and vals[-1] <= 1e12 else math.inf


def _sup_concave_1d(h):
    """sup over t of a concave function h (may be -inf); inf if it keeps growing."""

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


